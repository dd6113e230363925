"""Figures from results; the only package that imports matplotlib."""

import logging

# matplotlib logs every font family it cannot find at WARNING ("findfont: Font family
# ['STIXGeneral'] not found. Falling back to DejaVu Sans", about 20 lines on a fresh
# machine's first report); the fallback font is what the figures use anyway
logging.getLogger("matplotlib.font_manager").setLevel(logging.ERROR)
