#include "drivers/errors.hpp"

namespace junco::drivers {

const char* to_string(ErrorKind kind) {
  switch (kind) {
    case ErrorKind::timeout: return "timeout";
    case ErrorKind::disconnected: return "disconnected";
    case ErrorKind::garbled: return "garbled reply";
    case ErrorKind::instrument: return "instrument error";
    case ErrorKind::overrange: return "overrange";
    case ErrorKind::config: return "configuration";
  }
  return "unknown";
}

}  // namespace junco::drivers
