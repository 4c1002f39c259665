// Private to ident/: the concrete readers behind open_record().
#pragma once

#include <cstddef>
#include <memory>
#include <string>

#include "ident/record.h"

namespace benchid::ident::detail {

bool looks_like_sound_file(const unsigned char* head, std::size_t n);
std::unique_ptr<RecordReader> open_sound(const std::string& path, const ReadOptions& opts);
std::unique_ptr<RecordReader> open_csv(const std::string& path, const ReadOptions& opts);

// Unit implied by a name suffix ("speed_rads" -> "rad/s"), or "" (common
// practice for DAQ column names; the list is in the README).
std::string unit_from_suffix(const std::string& name);

}  // namespace benchid::ident::detail
