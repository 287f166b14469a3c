// Test helper: a GoogleTest fixture that gives each test a fresh directory
// under /tmp (mkdtemp), removed afterwards, with small helpers to write a
// circuit file into it, name a path in it, read a file back and list the
// temporaries ('.'-names) an interrupted or failed write would leave.
// Not here: running the binary (process.hpp).
#pragma once

#include <gtest/gtest.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

namespace ringdown::test {

class ScratchDirTest : public ::testing::Test {
 protected:
  void SetUp() override {
    char pattern[] = "/tmp/ringdown-cli-test-XXXXXX";
    ASSERT_NE(::mkdtemp(pattern), nullptr);
    dir_ = pattern;
  }
  void TearDown() override { std::filesystem::remove_all(dir_); }

  std::string write(const std::string& name, const std::string& text) {
    const std::filesystem::path path = dir_ / name;
    std::ofstream(path, std::ios::binary) << text;
    return path.string();
  }
  std::string path(const std::string& name) const { return (dir_ / name).string(); }
  static std::string read_all(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    std::ostringstream s;
    s << in.rdbuf();
    return s.str();
  }
  // Files in the directory whose names start with '.' (temporaries).
  std::vector<std::string> hidden_files() const {
    std::vector<std::string> out;
    for (const auto& e : std::filesystem::directory_iterator(dir_))
      if (e.path().filename().string().front() == '.') out.push_back(e.path().filename().string());
    return out;
  }

  std::filesystem::path dir_;
};

}  // namespace ringdown::test
