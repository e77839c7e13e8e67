"""The desktop workbench (PySide6 + pyqtgraph). Start it with :func:`appraise.gui.app.run`."""
