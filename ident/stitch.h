// Stitching FRFs measured over different bands or by different methods
// (random noise below, stepped sine above; a fine low band and a coarse
// wide one) into one FRF, line by line from the source with the lower
// random error.
//
// Each source's line k has the error e_k = rel_err (infinite when the line
// is flagged unreliable or has no error). A line is kept when no other
// source covers its frequency with a lower error, the other source's error
// taken between its two neighbouring lines (the larger of the two, so a
// gap between its lines is not trusted more than its worse side); on a tie
// the earlier source wins. Outside another source's band that source does
// not compete. The result is every kept line in frequency order; where the
// source changes there is a seam, recorded with the sources' bands in
// corrections.
#pragma once

#include <string>
#include <vector>

#include "ident/frf.h"

namespace benchid::ident {

struct StitchSource {
  const Frf* frf = nullptr;
  std::string name;  // for messages and the metadata
};

struct StitchResult {
  Frf frf;
  std::vector<double> seams_hz;         // between the last line of one source and the first of the next
  std::vector<std::size_t> lines_from;  // lines kept from each source
};

// Throws InputError when fewer than two sources are given or their
// channels or units differ (naming the source).
StitchResult stitch(const std::vector<StitchSource>& sources);

}  // namespace benchid::ident
