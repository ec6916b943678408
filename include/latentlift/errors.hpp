// Typed exceptions that say what failed and where. The CLI maps InputError and
// UsageError to exit code 2 and any other Error to exit code 1, in one line.
#pragma once

#include <stdexcept>
#include <string>

namespace latentlift {

/// A runtime failure (exit code 1): disk full, library failure, failed rank.
class Error : public std::runtime_error {
 public:
  explicit Error(const std::string& message) : std::runtime_error(message) {}
};

/// Bad input data (exit code 2): names the file, the variable and what was expected.
class InputError : public Error {
 public:
  InputError(std::string file, std::string variable, std::string expectation)
      : Error(compose(file, variable, expectation)),
        file_(std::move(file)), variable_(std::move(variable)),
        expectation_(std::move(expectation)) {}
  const std::string& file() const { return file_; }
  const std::string& variable() const { return variable_; }
  const std::string& expectation() const { return expectation_; }

 private:
  static std::string compose(const std::string& file, const std::string& variable,
                             const std::string& expectation) {
    std::string text = file;
    if (!variable.empty()) text += ": variable '" + variable + "'";
    return text + ": " + expectation;
  }
  std::string file_, variable_, expectation_;
};

/// Bad usage (exit code 2): options, configuration keys, values out of range.
class UsageError : public Error {
 public:
  explicit UsageError(const std::string& message) : Error(message) {}
};

}  // namespace latentlift
