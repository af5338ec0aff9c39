"""viz: the plotly view layer of vesselnet (interactive network views and HTML reports).

Views take results (:class:`vesselnet.result.SteadyResult` and its network)
and never solve; they write files only when asked.  The library never
imports this package; the command line does, inside the view commands.

- :func:`network_figure`: the network in 2-D or 3-D, coloured by a result
  quantity or by its change against a baseline.
- :func:`bed_share_figure`, :func:`share_comparison_figure`,
  :func:`waveform_figure`: charts.
- :func:`result_section`, :func:`comparison_section`, :func:`write_page`:
  offline HTML pages.
"""

from .charts import bed_share_figure, share_comparison_figure, waveform_figure
from .layout import Placement, place_nodes
from .network import network_figure
from .page import Section, page_html, write_image, write_page
from .quantities import QUANTITIES, available, quantity
from .report import comparison_section, result_section

__all__ = ["QUANTITIES", "Placement", "Section", "available", "bed_share_figure", "comparison_section",
           "network_figure", "page_html", "place_nodes", "quantity", "result_section",
           "share_comparison_figure", "waveform_figure", "write_image", "write_page"]
