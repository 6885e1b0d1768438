// Label files: the known windows (faults, planned events) of a recording.
//
// `<name>.labels.csv` sits beside `<name>.csv` or `<name>.csv.gz`. Its header is exactly
// `start,end,kind`; each row is one window with ISO-8601 UTC times (see timestamp.h),
// both ends inclusive, end >= start, and a kind word: letters, digits, '_' or '-',
// starting with a letter (`anomaly` for a fault the detector should flag, `event` for
// an expected operation such as a planned stop). A header alone means no windows. Rows
// may come in any order and windows may overlap; they are returned in file order.
// Plain or gzip, CRLF, a BOM and blank lines are handled as for recordings.
//
// Thread-safety: pure functions, safe from any thread. Ownership: plain values.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"
#include "core/time.h"

namespace nightjar::replay {

struct LabelWindow {
  core::TimestampUs start = 0;  // inclusive
  core::TimestampUs end = 0;    // inclusive, >= start
  std::string kind;             // e.g. "anomaly" or "event"

  bool Contains(core::TimestampUs t) const { return start <= t && t <= end; }
};

// Reads all windows of a labels file. NotFound if it does not exist (a recording
// without labels is normal: the caller decides); InvalidArgument naming
// path:line:column for a wrong header, a wrong cell count, a bad timestamp or kind, or
// end < start; DataLoss for an unreadable file.
core::Result<std::vector<LabelWindow>> ReadLabels(const std::string& path);

// The labels path belonging to a recording: "<dir>/day.csv.gz" and "<dir>/day.csv" give
// "<dir>/day.labels.csv"; any other name gets ".labels.csv" appended.
std::string LabelsPathFor(std::string_view recording_path);

}  // namespace nightjar::replay
