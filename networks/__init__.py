"""The bundled demo networks (YAML), found with importlib.resources."""
