"""The valuation worksheet as plain content, and its Qt-free renderers (HTML, CSV, XLSX).

Nothing here imports Qt: the PDF writer and the figure renderer live in
``appraise.qtrender`` and take the content built here.
"""
