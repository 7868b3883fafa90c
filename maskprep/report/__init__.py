"""Self-contained HTML pages and their inline SVG charts, shared by the audit and compare pages.

It renders and escapes; it computes no figures.
"""
