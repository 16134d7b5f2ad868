"""Pages from AnalysisResults: Altair views, the Markdown page, the archive and the site.

Nothing here computes a statistic; every number shown comes from ``analysis.json``.
"""
