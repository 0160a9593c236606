"""speccat browse: the Textual terminal browser (``make_app`` in ``speccat.tui.app``)."""
