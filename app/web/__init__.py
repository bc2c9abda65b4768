"""The browser design sheet: a FastAPI app over the analysis core.

The web layer validates, calls the core and renders; it derives no circuit
equations of its own.  The core never imports from here.
"""
