// Status is header-only; this file keeps the core library non-empty until more lands.
#include "core/status.h"
