#include "config_errors.h"

#include <cstdio>
#include <string>

namespace nightjar::daemon {

int PrintConfigErrors(std::string_view command, std::string_view path,
                      const config::LoadResult& loaded) {
  for (const config::ConfigError& error : loaded.errors) {
    std::fprintf(stderr, "%s\n", error.ToString().c_str());
  }
  const std::string command_text(command);
  const std::string path_text(path);
  std::fprintf(stderr, "nightjar %s: %s has %zu error%s\n", command_text.c_str(), path_text.c_str(),
               loaded.errors.size(), loaded.errors.size() == 1 ? "" : "s");
  return 1;
}

}  // namespace nightjar::daemon
