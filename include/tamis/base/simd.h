// Wide instruction paths, chosen at run time.
//
// An inner loop (the look-alike join's Hamming distances) has a second version
// for AVX-512 processors, compiled for it
// with a function attribute and used only when the processor reports the
// instructions (the build itself targets plain x86-64). Both versions compute the
// same integers, so every answer is the same on every machine; tests run both
// and compare them. allow_wide_paths(false) forces the plain versions (tests);
// it must not be called while a stage runs.
#pragma once

namespace tamis {

// AVX-512F with VPOPCNTDQ (eight 64-bit population counts an instruction).
bool wide_popcount_usable();

void allow_wide_paths(bool allowed);

}  // namespace tamis
