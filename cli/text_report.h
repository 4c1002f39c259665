// Plain-text report of an FRF estimate: what was measured and how, the
// quality figures, a log-spaced selection of lines with 1-sigma error bars,
// warnings, and the safety caution every benchid report carries.
#pragma once

#include <string>

#include "ident/frf.h"

namespace benchid::cli {

// The caution printed in every report (DESIGN.md, "Safety").
extern const char* const kCaution;

std::string frf_text_report(const ident::Frf& f, const std::string& command_line, std::size_t rows = 32);

}  // namespace benchid::cli
