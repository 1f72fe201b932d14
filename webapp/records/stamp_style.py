"""The visible signature stamp's look: its font (DejaVu Sans, the record's own font, cut to
the scripts names are written in) and its text box."""

from __future__ import annotations

import io
from functools import lru_cache
from pathlib import Path
from typing import Any

from pyhanko.pdf_utils.text import TextBoxStyle
from pyhanko.stamp import TextStampStyle

# The stamp's font: DejaVu Sans, the record's own font (Debian's fonts-dejavu-core), embedded
# as a subset so a name in any script prints as entered.
STAMP_FONT = Path("/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf")
STAMP_FONT_SIZE = 9
# Line pitch above the size, so stamp lines stay apart when printed and scanned at 150 dpi.
STAMP_LEADING = 11

# What the stamp font keeps of DejaVu Sans: Latin with its extensions, Greek, Cyrillic and
# the general punctuation (names as people write them in the regions the fonts cover).
_STAMP_RANGES = (*range(0x20, 0x250), *range(0x370, 0x530), *range(0x1E00, 0x1F00),
                 *range(0x2000, 0x2070), 0x20AC, 0x2122)


@lru_cache(maxsize=1)
def stamp_font() -> bytes:
    """DejaVu Sans cut to the stamp's scripts and scaled to 1000 units per em.

    The scaling is needed, not cosmetic: pyHanko writes the glyph widths of an embedded
    font in the font's own units, and PDF reads them as thousandths of an em (ISO 32000-1
    9.7.4.3), so a 2048-unit font would print with its letters twice as far apart. About a
    second, once per process; `sparkward serve` does it at start-up.
    """
    from fontTools import subset, ttLib
    from fontTools.ttLib.scaleUpem import scale_upem

    font = ttLib.TTFont(STAMP_FONT)
    options = subset.Options()
    options.drop_tables += ["FFTM"]
    options.notdef_outline = True
    # No kerning or ligature tables and no hinting: the stamp is a few short lines, and
    # pyHanko subsets the font again on every signature, which these tables make slow.
    options.layout_features = []
    options.hinting = False
    subsetter = subset.Subsetter(options)
    subsetter.populate(unicodes=_STAMP_RANGES)
    subsetter.subset(font)
    scale_upem(font, 1000)
    out = io.BytesIO()
    font.save(out)
    font.close()
    return out.getvalue()


@lru_cache(maxsize=1)
def stamp_style() -> TextStampStyle:
    from pyhanko.pdf_utils.font.opentype import GlyphAccumulator, GlyphAccumulatorFactory

    font = stamp_font()

    class InMemoryFont(GlyphAccumulatorFactory):
        """pyHanko's OpenType font factory over bytes prepared once (its own opens the file
        on every signature and never closes it)."""

        def create_font_engine(self, writer: Any, obj_stream: Any = None) -> GlyphAccumulator:
            if obj_stream is None and writer.stream_xrefs and self.create_objstream_if_needed:
                obj_stream = writer.prepare_object_stream()
            return GlyphAccumulator(writer=writer, font_handle=io.BytesIO(font),
                                    font_size=self.font_size, obj_stream=obj_stream)

    return TextStampStyle(
        stamp_text="%(stamp)s", border_width=1, background=None,
        text_box_style=TextBoxStyle(font=InMemoryFont(str(STAMP_FONT), STAMP_FONT_SIZE),
                                    font_size=STAMP_FONT_SIZE, leading=STAMP_LEADING))
