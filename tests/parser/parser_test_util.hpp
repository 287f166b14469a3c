// Helpers shared by the parser tests: load a text, find a diagnostic by
// value (line, column, message substring, hint substring).
#pragma once

#include <gtest/gtest.h>

#include <string>

#include "parser/load.hpp"

namespace ringdown::testing {

inline LoadResult load(const std::string& text, const LoadOptions& options = {}) {
  return load_text(text, "test.rlc", options);
}

// The first diagnostic whose message contains `message` (nullptr if none).
inline const Diagnostic* find_diagnostic(const LoadResult& r, const std::string& message) {
  for (const Diagnostic& d : r.diagnostics) {
    if (d.message.find(message) != std::string::npos) return &d;
  }
  return nullptr;
}

inline std::string all_messages(const LoadResult& r) {
  std::string s;
  for (const Diagnostic& d : r.diagnostics) {
    s += std::to_string(d.where.line) + ":" + std::to_string(d.where.column) + ": " + d.message +
         (d.hint.empty() ? "" : " [hint: " + d.hint + "]") + "\n";
  }
  return s;
}

// Expect an error at line:column whose message and hint contain the texts.
inline void expect_error(const LoadResult& r, int line, int column, const std::string& message,
                         const std::string& hint = "") {
  EXPECT_FALSE(r.ok()) << all_messages(r);
  const Diagnostic* d = find_diagnostic(r, message);
  ASSERT_NE(d, nullptr) << "no diagnostic containing '" << message << "' in:\n" << all_messages(r);
  EXPECT_EQ(d->severity, Severity::Error) << d->message;
  EXPECT_EQ(d->where.line, line) << d->message;
  if (column > 0) {
    EXPECT_EQ(d->where.column, column) << d->message;
  }
  if (!hint.empty()) {
    EXPECT_NE(d->hint.find(hint), std::string::npos) << "hint: " << d->hint;
  }
  EXPECT_EQ(d->where.file, "test.rlc");
}

inline void expect_warning(const LoadResult& r, int line, const std::string& message) {
  const Diagnostic* d = find_diagnostic(r, message);
  ASSERT_NE(d, nullptr) << "no diagnostic containing '" << message << "' in:\n" << all_messages(r);
  EXPECT_EQ(d->severity, Severity::Warning);
  EXPECT_EQ(d->where.line, line);
}

inline const Element& element(const Circuit& c, const std::string& name) {
  const int k = c.find_element(name);
  EXPECT_GE(k, 0) << name;
  return c.elements.at(static_cast<std::size_t>(k < 0 ? 0 : k));
}

// A minimal valid body that closes every node, to append element lines to.
inline const char* kLoad = "resistor Rload_ out gnd 1k\n";

}  // namespace ringdown::testing
