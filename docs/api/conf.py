"""Sphinx configuration of the API reference (built by tests/test_api_docs.py)."""
project = "wavefit"
extensions = ["sphinx.ext.autodoc", "numpydoc"]
autodoc_member_order = "bysource"
autodoc_typehints = "none"          # the signatures' annotations are in the numpydoc sections
numpydoc_show_class_members = False  # members are listed by autodoc itself
numpydoc_class_members_toctree = False
html_theme = "alabaster"
exclude_patterns = ["_build"]
