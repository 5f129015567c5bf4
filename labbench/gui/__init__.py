"""The desktop window (the only package that imports Qt). Start it with ``labbench.gui.app.run_app``."""
