// Error and Result<T>: the one error convention at every I/O boundary of beamtrim.
// An Error names the file and, where there is one, the DICOM attribute or key at fault,
// plus a plain-language reason. Value types; safe to copy and move across threads.
// Third-party failures (DCMTK conditions, cv::Exception, SQLite codes) become Errors at the
// edge of the layer that calls them.
#pragma once

#include <string>
#include <utility>
#include <variant>

namespace beamtrim {

// Broad classes of failure; callers branch on these, people read `reason`.
enum class ErrorKind {
  kNotFound,      // file, folder or record absent
  kUnreadable,    // permission, I/O failure
  kNotDicom,      // bytes are not a DICOM data set
  kMalformed,     // DICOM structure or values broken or inconsistent
  kUnsupported,   // valid DICOM that beamtrim does not analyse (modality, colour, syntax)
  kInvalidInput,  // bad option, rules file or argument
  kStore,         // store (SQLite) failure
  kNetwork,       // DICOM network failure
  kInternal,      // a bug: should never happen
};

const char* ErrorKindName(ErrorKind kind);

struct Error {
  ErrorKind kind = ErrorKind::kInternal;
  std::string file;       // path or other locator (may be empty)
  std::string attribute;  // DICOM tag "(0028,0010) Rows", a rules key, ... (may be empty)
  std::string reason;     // plain-language reason, no trailing period

  // "FILE: ATTRIBUTE: reason" with empty parts left out.
  std::string ToString() const;
};

inline Error MakeError(ErrorKind kind, std::string file, std::string reason,
                       std::string attribute = {}) {
  return Error{kind, std::move(file), std::move(attribute), std::move(reason)};
}

// Either a value or an Error. Check ok() before value(); value() on an error is a bug.
template <class T>
class [[nodiscard]] Result {
 public:
  Result(T value) : data_(std::move(value)) {}       // NOLINT: implicit by design
  Result(Error error) : data_(std::move(error)) {}   // NOLINT: implicit by design

  bool ok() const { return data_.index() == 0; }
  explicit operator bool() const { return ok(); }

  T& value() & { return std::get<0>(data_); }
  const T& value() const& { return std::get<0>(data_); }
  T&& value() && { return std::get<0>(std::move(data_)); }
  T* operator->() { return &value(); }
  const T* operator->() const { return &value(); }
  T& operator*() & { return value(); }
  const T& operator*() const& { return value(); }

  const Error& error() const { return std::get<1>(data_); }

 private:
  std::variant<T, Error> data_;
};

// Result for operations with no value.
class [[nodiscard]] Status {
 public:
  Status() = default;
  Status(Error error) : error_(std::move(error)), ok_(false) {}  // NOLINT: implicit by design
  static Status Ok() { return Status(); }

  bool ok() const { return ok_; }
  explicit operator bool() const { return ok_; }
  const Error& error() const { return error_; }

 private:
  Error error_;
  bool ok_ = true;
};

}  // namespace beamtrim
