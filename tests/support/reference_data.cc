#include "support/reference_data.h"

#include <gtest/gtest.h>

#include <cstdlib>
#include <fstream>

namespace nightjar::testing {

std::filesystem::path SharedDir() {
  // getenv is read once per call from test code only; tests are single-threaded here.
  if (const char* env = std::getenv("NIGHTJAR_SHARED_DIR");
      env != nullptr && *env != '\0') {  // NOLINT(concurrency-mt-unsafe)
    return env;
  }
  return NIGHTJAR_DEFAULT_SHARED_DIR;
}

nlohmann::json LoadReference(const std::string& file_name) {
  const std::filesystem::path path = SharedDir() / "references" / file_name;
  std::ifstream in(path);
  if (!in) {
    ADD_FAILURE() << "reference file not found: " << path;
    return {};
  }
  nlohmann::json parsed = nlohmann::json::parse(in, nullptr, /*allow_exceptions=*/false);
  if (parsed.is_discarded()) {
    ADD_FAILURE() << "reference file is not valid JSON: " << path;
    return {};
  }
  return parsed;
}

std::vector<double> ToVector(const nlohmann::json& array) {
  std::vector<double> out;
  if (!array.is_array()) {
    if (array.is_number()) out.push_back(array.get<double>());
    return out;
  }
  for (const auto& item : array) {
    if (item.is_array()) {
      const std::vector<double> row = ToVector(item);
      out.insert(out.end(), row.begin(), row.end());
    } else {
      out.push_back(item.get<double>());
    }
  }
  return out;
}

}  // namespace nightjar::testing
