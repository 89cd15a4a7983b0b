#include "aerosect/error.hpp"

#include <fmt/format.h>

namespace aerosect {

namespace {
std::string format_input_error(const SourceLocation& w, const std::string& key,
                               const std::string& value, const std::string& problem,
                               const std::string& allowed) {
  const std::string file = w.file.empty() ? std::string("<input>") : w.file;
  const std::string line = w.line > 0 ? fmt::format(":{}", w.line) : std::string();
  const std::string column = w.line > 0 && w.column > 0 ? fmt::format(":{}", w.column) : std::string();
  const std::string what = key.empty() && value.empty() ? std::string()
                           : value.empty()              ? fmt::format("key '{}': ", key)
                           : key.empty()                ? fmt::format("{}: ", value)
                                           : fmt::format("key '{}' = {}: ", key, value);
  const std::string tail = allowed.empty() ? std::string() : fmt::format("\n  allowed: {}", allowed);
  return fmt::format("{}{}{}: {}{}{}", file, line, column, what, problem, tail);
}
}  // namespace

InputError::InputError(SourceLocation where, std::string key, std::string value,
                       std::string problem, std::string allowed)
    : Error(format_input_error(where, key, value, problem, allowed)),
      where_(std::move(where)),
      key_(std::move(key)),
      value_(std::move(value)),
      problem_(std::move(problem)),
      allowed_(std::move(allowed)) {}

NumericalError::NumericalError(double time, std::string message)
    : Error(fmt::format("numerical trouble at t = {:.9g} s: {}", time, message)), time_(time) {}

OutputError::OutputError(std::string path, std::string message)
    : Error(fmt::format("cannot write '{}': {}", path, message)), path_(std::move(path)) {}

InternalError::InternalError(const char* file, int line, const std::string& condition)
    : Error(fmt::format("internal error (please report): {}:{}: check failed: {}", file, line,
                        condition)) {}

}  // namespace aerosect
