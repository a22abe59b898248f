"""Where the text of a PDF lies: the horizontal extent of every text-showing operator, from the fonts'
glyph widths (PDF 1.7, ISO 32000-1, 9.4.4 text space and 9.7.4.3 glyph widths of CIDFonts; 9.2.4 the
/Widths of simple fonts), read with pypdf.  Used to check that printed text stays inside the page's margins.
"""

from __future__ import annotations


def _widths(font):
    """Glyph code -> width [1/1000 of text space], the default width, and bytes per code (2 for a
    Type0 font with Identity-H encoding, as WeasyPrint writes, else 1)."""
    font = font.get_object()
    if font.get("/Subtype") == "/Type0":
        desc = font["/DescendantFonts"][0].get_object()
        default = float(desc.get("/DW", 1000))
        table = {}
        w = desc.get("/W", [])
        i = 0
        while i < len(w):
            first = int(w[i])
            item = w[i + 1].get_object() if hasattr(w[i + 1], "get_object") else w[i + 1]
            if isinstance(item, list):
                for k, v in enumerate(item):
                    table[first + k] = float(v)
                i += 2
            else:
                for code in range(first, int(item) + 1):
                    table[code] = float(w[i + 2])
                i += 3
        return table, default, 2
    first = int(font.get("/FirstChar", 0))
    widths = [float(v) for v in font.get("/Widths", [])]
    return {first + k: v for k, v in enumerate(widths)}, 0.0, 1


def text_runs(page):
    """(x_start, x_end, y) of every text-showing operator (Tj, TJ) on a pypdf page, in PDF points.

    The run's width is the sum of its glyphs' widths times the font size, less the TJ adjustments
    (thousandths of a text space unit), mapped through the text and current transformation matrices.
    Character and word spacing are taken as 0 (WeasyPrint positions glyphs with TJ adjustments).
    """
    fonts = {}
    resources = page.get("/Resources", {})
    font_dict = resources.get_object().get("/Font", {}) if resources else {}
    for name, ref in font_dict.get_object().items():
        fonts[name] = _widths(ref)
    state = {"font": None, "size": 0.0}
    runs = []

    def before(op, args, cm, tm):
        if op == b"Tf":
            state["font"], state["size"] = args[0], float(args[1])
        elif op in (b"Tj", b"TJ"):
            table, default, nbytes = fonts.get(state["font"], ({}, 0.0, 1))
            parts = args[0] if op == b"TJ" else [args[0]]
            width = 0.0
            for part in parts:
                if isinstance(part, (bytes, str)) or hasattr(part, "original_bytes"):
                    raw = part.original_bytes if hasattr(part, "original_bytes") else (
                        part if isinstance(part, bytes) else part.encode("latin-1"))
                    for k in range(0, len(raw), nbytes):
                        code = int.from_bytes(raw[k:k + nbytes], "big")
                        width += table.get(code, default) / 1000 * state["size"]
                else:
                    width -= float(part) / 1000 * state["size"]
            def device(x):
                X, Y = x * tm[0] + tm[4], x * tm[1] + tm[5]
                return X * cm[0] + Y * cm[2] + cm[4], X * cm[1] + Y * cm[3] + cm[5]
            (x0, y0), (x1, _) = device(0.0), device(width)
            runs.append((min(x0, x1), max(x0, x1), y0))

    page.extract_text(visitor_operand_before=before)
    return runs
