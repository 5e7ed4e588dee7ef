#pragma once
// Catch2 matcher for plaudit::Error: the exit code and fragments the message must contain
// (typically the file name), for REQUIRE_THROWS_MATCHES(expr, plaudit::Error, IsError(...)).
#include <sstream>
#include <string>
#include <vector>

#include <catch2/catch.hpp>

#include "plaudit/core/error.h"

namespace plaudit::testing {

class ErrorMatcher : public Catch::MatcherBase<plaudit::Error> {
 public:
  ErrorMatcher(ExitCode code, std::vector<std::string> fragments)
      : code_(code), fragments_(std::move(fragments)) {}

  bool match(const plaudit::Error& e) const override {
    if (e.code() != code_) return false;
    const std::string message = e.what();
    for (const auto& f : fragments_) {
      if (message.find(f) == std::string::npos) return false;
    }
    return true;
  }

  std::string describe() const override {
    std::ostringstream s;
    s << "has exit code " << static_cast<int>(code_) << " and a message containing";
    for (const auto& f : fragments_) s << " \"" << f << "\"";
    return s.str();
  }

 private:
  ExitCode code_;
  std::vector<std::string> fragments_;
};

inline ErrorMatcher IsError(ExitCode code, std::vector<std::string> fragments = {}) {
  return ErrorMatcher(code, std::move(fragments));
}

}  // namespace plaudit::testing

namespace Catch {
// Show the exception's code and message when a match fails.
template <>
struct StringMaker<plaudit::Error> {
  static std::string convert(const plaudit::Error& e) {
    return "plaudit::Error(" + std::to_string(e.exit_status()) + ", \"" + e.what() + "\")";
  }
};
}  // namespace Catch
