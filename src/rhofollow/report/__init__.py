"""The report folder of ``rhofollow plan``: plots (PNG), tables (JSON / ECSV / CSV) and summaries
(Markdown and a self-contained HTML page)."""
