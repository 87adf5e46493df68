// Display names of the small enums shared by every layer. They appear in JSON records and in
// the store, so they are part of the public contract (docs/record.md).
#include "beamtrim/field.h"
#include "beamtrim/status.h"

namespace beamtrim {

const char* SideName(Side side) {
  switch (side) {
    case Side::kLeft: return "left";
    case Side::kRight: return "right";
    case Side::kTop: return "top";
    case Side::kBottom: return "bottom";
  }
  return "left";
}

const char* EdgeDefinitionName(EdgeDefinition definition) {
  switch (definition) {
    case EdgeDefinition::kHalfTransition: return "half-transition";
    case EdgeDefinition::kQuarterMaximum: return "quarter-maximum";
  }
  return "half-transition";
}

const char* ErrorKindName(ErrorKind kind) {
  switch (kind) {
    case ErrorKind::kNotFound: return "not found";
    case ErrorKind::kUnreadable: return "unreadable";
    case ErrorKind::kNotDicom: return "not DICOM";
    case ErrorKind::kMalformed: return "malformed";
    case ErrorKind::kUnsupported: return "unsupported";
    case ErrorKind::kInvalidInput: return "invalid input";
    case ErrorKind::kStore: return "store";
    case ErrorKind::kNetwork: return "network";
    case ErrorKind::kInternal: return "internal";
  }
  return "internal";
}

std::string Error::ToString() const {
  std::string out;
  auto append = [&out](const std::string& part) {
    if (part.empty()) return;
    if (!out.empty()) out += ": ";
    out += part;
  };
  append(file);
  append(attribute);
  append(reason.empty() ? std::string(ErrorKindName(kind)) : reason);
  return out;
}

}  // namespace beamtrim
