// Access to the outside check values under ../shared (references/ and datasets/).
//
// Tests compare nightjar's computations with numbers from published sources and
// reference libraries; those numbers live outside the repository. A missing file
// is a test failure, never a skip.
#pragma once

#include <filesystem>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

namespace nightjar::testing {

// The shared folder: $NIGHTJAR_SHARED_DIR if set, else the path fixed at configure time.
std::filesystem::path SharedDir();

// Parses references/<file_name>. Records a gtest failure and returns null JSON if the
// file is missing or malformed.
nlohmann::json LoadReference(const std::string& file_name);

// Converts a JSON array of numbers into a vector; a nested array is flattened row by row.
std::vector<double> ToVector(const nlohmann::json& array);

}  // namespace nightjar::testing
