// Colours shared by the overlays, the charts and the report style sheet. Overlay colours are
// from the Okabe-Ito palette (Okabe & Ito, "Color Universal Design", 2008), chosen to stay
// distinct for the common colour-vision deficiencies; every meaning also has a line style or a
// text label, so nothing depends on colour alone. Text colours meet WCAG 2.1 AA contrast on the
// backgrounds they are used on (checked in tests/report/accessibility_test.cpp).
#pragma once

#include <cstdint>

namespace beamtrim::report_palette {

struct Rgb {
  uint8_t r, g, b;
};

// Okabe-Ito.
inline constexpr Rgb kOrange{0xE6, 0x9F, 0x00};
inline constexpr Rgb kSkyBlue{0x56, 0xB4, 0xE9};
inline constexpr Rgb kBluishGreen{0x00, 0x9E, 0x73};
inline constexpr Rgb kYellow{0xF0, 0xE4, 0x42};
inline constexpr Rgb kBlue{0x00, 0x72, 0xB2};
inline constexpr Rgb kVermillion{0xD5, 0x5E, 0x00};
inline constexpr Rgb kReddishPurple{0xCC, 0x79, 0xA7};

// Overlay meanings (each paired with a line style in overlay.cpp).
inline constexpr Rgb kBorderVisible = kBluishGreen;    // solid
inline constexpr Rgb kBorderNotVisible = kOrange;      // dashed
inline constexpr Rgb kBorderClipped = kVermillion;     // solid with inward ticks
inline constexpr Rgb kBorderNotAssessable = kReddishPurple;  // dash-dot
inline constexpr Rgb kAnatomyBox = kSkyBlue;           // dotted
inline constexpr Rgb kExcess = kYellow;                // hatched, translucent

// Report page (CSS). Paper and ink are warm neutrals; the accent is a deep slate blue.
inline constexpr Rgb kPaper{0xFB, 0xFA, 0xF7};
inline constexpr Rgb kPanel{0xF1, 0xEF, 0xEA};
inline constexpr Rgb kInk{0x1E, 0x27, 0x2E};
inline constexpr Rgb kMuted{0x52, 0x5C, 0x63};
inline constexpr Rgb kAccent{0x1F, 0x4E, 0x6B};
inline constexpr Rgb kRule{0x7B, 0x84, 0x8A};        // chart axes and table rules
inline constexpr Rgb kChartBar = kBlue;               // bars and trend line
inline constexpr Rgb kChartLimit = kVermillion;       // control limits (dashed)
inline constexpr Rgb kCautionInk{0x5A, 0x3A, 0x00};   // text in the caution box
inline constexpr Rgb kCautionBg{0xFD, 0xF3, 0xDC};

}  // namespace beamtrim::report_palette
