"""The clinical caution that goes with every result that judges lesions or grafts.

Examples
--------
>>> CAUTION.startswith("Research and planning aid, not a medical device")
True
"""

CAUTION = ("Research and planning aid, not a medical device: results come from idealised "
           "models and must be reviewed by licensed clinicians; they do not replace clinical "
           "judgement, and local regulations and practice take precedence.")
"""One sentence, printed by every command that compares, ranks or judges lesions or grafts."""
