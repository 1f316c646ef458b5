// The IJG quality scale of JPEG quantization tables (ITU-T T.81 Annex K, Table
// K.1, scaled as the Independent JPEG Group's library scales it by its quality
// setting 1-100; libjpeg-turbo, OpenCV and Pillow write these tables).
//
// The probe reads a JPEG's luminance table (DQT, table 0) and keeps the quality
// whose scaled table is nearest (jpeg_quality_of_table); the look-alike
// confirmation imitates a re-encoding at that quality (relate/match.h). Pure;
// thread-safe.
#pragma once

#include <cstdint>

namespace tamis {

// The quantization step of coefficient k (natural, row-major order: k = 8 v + u)
// of the IJG luminance table at quality 1-100 (held to 1-255, as baseline JPEG
// requires).
int ijg_luma_step(int quality, int k);

// The IJG quality (1-100) whose luminance table is nearest to `table` (64 steps
// in natural order): the least sum of absolute differences, the highest quality
// of equals. A table that no IJG quality gives still gets its nearest.
uint8_t jpeg_quality_of_table(const uint16_t* table);

// Zigzag position z of T.81 Figure A.6 -> natural index 8 v + u.
extern const uint8_t kZigzagToNatural[64];

}  // namespace tamis
