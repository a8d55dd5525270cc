"""The report of one fitted analysis, as text built here and drawn by desktop/report_output.py.

    source   ReportInput and report_input(project, run): everything one report shows
    journal  tables in journal style (right-aligned numbers, fixed decimals, p as ".032")
    methods  the methods paragraph written from the actual settings, and its references
    html     the whole document as one self-contained HTML page (no script, no external file)
"""
