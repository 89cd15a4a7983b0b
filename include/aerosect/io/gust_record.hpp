#pragma once
// Recorded gust series from a file, for [[gust]] shape = "recorded".
//   CSV: two columns per line, base (time s, or distance m) and vertical gust
//        velocity (m/s, up positive), separated by a comma, semicolon, tab or
//        spaces; lines starting with '#' and a first header line are skipped.
//   HDF5 (.h5/.hdf5/.nc): two 1-D datasets of equal length, by default
//        `time` and `gust_velocity` (so a simulate output can be replayed).
// The base must be strictly increasing with at least two samples; values
// must be finite. Failures are InputErrors naming the file and the line or
// dataset.

#include <string>
#include <vector>

#include "aerosect/error.hpp"

namespace aerosect {

struct GustRecord {
  std::vector<double> base;      // s or m
  std::vector<double> velocity;  // m/s
};

// `where` and `key` locate the case entry that named the file (for messages).
GustRecord read_gust_record(const std::string& path, const std::string& base_dataset,
                            const std::string& velocity_dataset, const SourceLocation& where,
                            const std::string& key);

}  // namespace aerosect
