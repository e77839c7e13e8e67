"""Qt without the application's widgets: the PDF writer and the figure renderer.

Works headless (``QT_QPA_PLATFORM=offscreen``); :func:`qtapp.ensure_app` creates
the application object when none exists.
"""
