// Printing a config file's load errors the same way in every subcommand.
//
// Thread-safety: writes to stderr; call from the main thread. Ownership: borrows its
// arguments for the call.
#pragma once

#include <string_view>

#include "config/config.h"

namespace nightjar::daemon {

// Prints each error of `loaded` on its own line ("FILE:LINE:COL: KEY: MESSAGE") to stderr,
// then "nightjar <command>: <path> has N error(s)". Returns the exit code for a config
// error (1), so callers can `return PrintConfigErrors(...)`.
int PrintConfigErrors(std::string_view command, std::string_view path,
                      const config::LoadResult& loaded);

}  // namespace nightjar::daemon
