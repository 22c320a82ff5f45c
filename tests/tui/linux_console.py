"""What the Linux console can show: the characters of the console font Debian and Raspberry Pi OS
load by default for Western European languages (console-setup: CODESET=guess -> Lat15,
FONTFACE=Fixed, FONTSIZE=8x16; the defaults as remembered, not read off a Pi), i.e. the Unicode
table of Lat15-Fixed16.psf.gz in the console-setup-linux package (1.221), as inclusive ranges
of code points.  It has no braille and no eighth blocks (Textual's ▁▂▃ scroll-bar ends, ▏ borders)."""

from __future__ import annotations

LAT15_FIXED16 = (
    (0x0020, 0x007E), (0x00A0, 0x00FF), (0x0110, 0x0110), (0x011E, 0x011F), (0x0130, 0x0131),
    (0x0152, 0x0153), (0x015E, 0x0161), (0x0178, 0x0178), (0x017D, 0x017E), (0x0192, 0x0192),
    (0x02C6, 0x02C6), (0x02C9, 0x02C9), (0x02DC, 0x02DC), (0x0391, 0x0392), (0x0395, 0x0397),
    (0x0399, 0x039A), (0x039C, 0x039D), (0x039F, 0x039F), (0x03A1, 0x03A1), (0x03A4, 0x03A4),
    (0x03A7, 0x03A7), (0x03BC, 0x03BC), (0x03C0, 0x03C0), (0x0401, 0x0401), (0x0405, 0x0408),
    (0x0410, 0x0410), (0x0412, 0x0412), (0x0415, 0x0415), (0x041A, 0x041A), (0x041C, 0x041E),
    (0x0420, 0x0422), (0x0425, 0x0425), (0x0430, 0x0430), (0x0435, 0x0435), (0x043E, 0x043E),
    (0x0440, 0x0441), (0x0443, 0x0443), (0x0445, 0x0445), (0x0451, 0x0451), (0x0455, 0x0458),
    (0x04AE, 0x04AE), (0x2000, 0x200A), (0x2010, 0x2015), (0x2018, 0x201A), (0x201C, 0x201E),
    (0x2020, 0x2022), (0x2026, 0x2026), (0x202F, 0x2030), (0x2039, 0x203A), (0x203C, 0x203C),
    (0x207F, 0x207F), (0x20A7, 0x20A7), (0x20AC, 0x20AC), (0x20AE, 0x20AE), (0x2116, 0x2116),
    (0x2122, 0x2122), (0x212A, 0x212B), (0x2190, 0x2193), (0x2205, 0x2205), (0x2208, 0x2208),
    (0x2212, 0x2212), (0x221E, 0x221E), (0x2229, 0x2229), (0x2248, 0x2248), (0x2260, 0x2261),
    (0x2264, 0x2265), (0x226A, 0x226B), (0x2295, 0x2296), (0x2298, 0x2299), (0x229B, 0x229C),
    (0x2460, 0x2468), (0x24B6, 0x24EA), (0x2500, 0x257F), (0x2588, 0x2588), (0x2591, 0x2592),
    (0x25A0, 0x25A0), (0x25AE, 0x25AE), (0x25B2, 0x25B2), (0x25B4, 0x25B4), (0x25B6, 0x25B6),
    (0x25B8, 0x25B8), (0x25BC, 0x25BC), (0x25BE, 0x25BE), (0x25C0, 0x25C0), (0x25C2, 0x25C2),
    (0x25C8, 0x25C8), (0x25CF, 0x25CF), (0x2610, 0x2612), (0x2666, 0x2666), (0x2717, 0x2718),
    (0x2BBD, 0x2BBD), (0xFFFD, 0xFFFD),
)


def shows(ch: str) -> bool:
    """Whether the Linux console's default font has a glyph for ``ch``."""
    c = ord(ch)
    return ch == "\n" or any(a <= c <= b for a, b in LAT15_FIXED16)


def missing(text: str) -> set[str]:
    """The characters of ``text`` the Linux console cannot show."""
    return {ch for ch in text if not shows(ch)}


def unreadable_in_16_colours(app: object) -> list[str]:
    """Text on the app's screen whose colour and background fall on the same one of the 16
    standard colours (as Rich maps them for TERM=linux), i.e. text the console would not show."""
    import io

    from rich.color import ColorSystem
    from rich.console import Console

    w, h = app.size  # type: ignore[attr-defined]
    console = Console(width=w, height=h, file=io.StringIO(), force_terminal=True, color_system="standard",
                      record=True, legacy_windows=False)
    console.print(app.screen._compositor.render_update(full=True))  # type: ignore[attr-defined]
    bad = []
    for seg in console._record_buffer:
        style = seg.style
        if style is None or not seg.text.strip():
            continue
        fg = style.color.downgrade(ColorSystem.STANDARD).number if style.color else None
        bg = style.bgcolor.downgrade(ColorSystem.STANDARD).number if style.bgcolor else None
        if fg is not None and fg == bg:
            bad.append(f"{seg.text.strip()!r} (colour {fg} on {bg})")
    return bad
