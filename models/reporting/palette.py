"""The colours of effects, text and rules: one palette for the window (desktop/style.py takes
these) and for the pictures a report draws itself (models.reporting.strips).

Positive effects deep teal (solid), negative effects amber orange (dashed): colour-blind safe,
and the dash keeps them apart in greyscale.
"""

POSITIVE = "#1b7f79"   # deep teal, solid lines
NEGATIVE = "#b35900"   # amber orange (hue about 30 degrees), dashed lines
INK = "#1f2a30"        # text and axes
MUTED = "#6b777d"      # secondary text, effects whose interval includes 0
RULE = "#c9d1d4"       # thin lines, grid
