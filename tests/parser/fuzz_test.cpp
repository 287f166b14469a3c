// Mutation fuzzing of ringdown::load_text over every circuits/*.rlc file.
//
// Each case takes one example circuit, applies 1 to 6 random mutations
// (delete, insert, duplicate or swap characters; delete, duplicate or swap
// whitespace-separated tokens; drop a parenthesis; insert a random byte,
// including NUL and non-ASCII; splice in a language token), then loads it.
// Asserted for every case (ARCHITECTURE.md "errors are values", and the
// project rule "bad input: clear error, never crash/hang/silent wrong answer"):
//  - load_text returns (no crash, no exception, no call over 2 s: a watchdog
//    thread ends the run with the offending input if one hangs);
//  - the result is ok(), or it carries at least one Error diagnostic with a
//    position (line >= 1 and column >= 1); an error about a file that cannot
//    be read (include, samples) needs only the line of its statement;
//  - a diagnostic in this file points at a line that exists.
// The seed is fixed (reproducible); the time budget is 20 s, or
// RINGDOWN_FUZZ_SECONDS. What this does not check: that errors are the
// *right* errors (the other parser tests do that).
#include <gtest/gtest.h>

#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <csignal>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <mutex>
#include <random>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "parser/load.hpp"

namespace ringdown {
namespace {

namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;

// Budget per load_text call: a file of a few kB must load in milliseconds;
// 2 s only catches a hang or a blow-up (common practice, no source).
constexpr double kCallLimitSeconds = 2.0;
constexpr double kDefaultBudgetSeconds = 20.0;
constexpr std::uint64_t kSeed = 0x52494e47444f574eull;  // "RINGDOWN"

// Words that make mutations reach deeper than random bytes do.
const std::vector<std::string> kTokens = {
    "(", ")", "=", ",", "\n", " ", "#", "\"", ".", "0", "gnd", "1meg", "4k7", "R47", "1e308",
    "1e-320", "-0", "block", "end", "use", "include \"missing.rlc\"", "samples(\"nope.csv\")",
    "step(", "pulse(", "sine(", "formula(t", "points(0 1, 0 2)", "sqrt(", "^", "^0.5", "*", "/0",
    "pi", "t", "within", "expect", "record", "report", "sweep", "trials", "transient",
    "frequency", "modes", "couple", "switch", "V", "Ohm", "\xCE\xA9", "\xC2\xB5", "%", "deg",
    "max(", "energy(", "from=", "to=", "nth=0", "k=1", "tol=", "e12(1, 10)", "linear(1, 2, 0)"};

struct Example {
  std::string path;
  std::string text;
};

std::vector<Example> examples() {
  std::vector<Example> out;
  const fs::path dir = fs::path(RINGDOWN_SOURCE_DIR) / "circuits";
  if (!fs::is_directory(dir)) return out;
  for (const auto& entry : fs::directory_iterator(dir)) {
    if (entry.path().extension() != ".rlc") continue;
    std::ifstream in(entry.path(), std::ios::binary);
    std::ostringstream text;
    text << in.rdbuf();
    out.push_back({entry.path().string(), text.str()});
  }
  std::sort(out.begin(), out.end(), [](const auto& a, const auto& b) { return a.path < b.path; });
  return out;
}

// Token boundaries: [begin, end) byte ranges of whitespace-separated words.
std::vector<std::pair<std::size_t, std::size_t>> token_spans(const std::string& s) {
  std::vector<std::pair<std::size_t, std::size_t>> spans;
  std::size_t k = 0;
  while (k < s.size()) {
    while (k < s.size() && std::isspace(static_cast<unsigned char>(s[k]))) ++k;
    const std::size_t begin = k;
    while (k < s.size() && !std::isspace(static_cast<unsigned char>(s[k]))) ++k;
    if (k > begin) spans.emplace_back(begin, k);
  }
  return spans;
}

void mutate(std::string& s, std::mt19937_64& random) {
  const auto pick = [&](std::size_t n) {
    return n == 0 ? std::size_t{0} : static_cast<std::size_t>(random() % n);
  };
  switch (random() % 10) {
    case 0:  // delete a character
      if (!s.empty()) s.erase(pick(s.size()), 1);
      break;
    case 1:  // insert a random byte (NUL and non-ASCII included)
      s.insert(s.begin() + static_cast<std::ptrdiff_t>(pick(s.size() + 1)),
               static_cast<char>(random() % 256));
      break;
    case 2: {  // duplicate a short range
      if (s.empty()) break;
      const std::size_t at = pick(s.size());
      const std::size_t n = std::min<std::size_t>(1 + pick(40), s.size() - at);
      s.insert(at, s.substr(at, n));
      break;
    }
    case 3: {  // swap two characters
      if (s.size() < 2) break;
      std::swap(s[pick(s.size())], s[pick(s.size())]);
      break;
    }
    case 4: case 5: case 6: {  // token level: delete, duplicate, swap
      const auto spans = token_spans(s);
      if (spans.size() < 2) break;
      const auto a = spans[pick(spans.size())];
      const std::string word = s.substr(a.first, a.second - a.first);
      if (random() % 3 == 0) {
        s.erase(a.first, a.second - a.first);
      } else if (random() % 2 == 0) {
        s.insert(a.first, word + " ");
      } else {
        const auto b = spans[pick(spans.size())];
        if (b.first == a.first) break;
        const std::string other = s.substr(b.first, b.second - b.first);
        // Replace the later span first so the earlier offsets stay valid.
        const auto& [first, second] = a.first < b.first ? std::pair{a, b} : std::pair{b, a};
        const std::string& first_word = a.first < b.first ? word : other;
        const std::string& second_word = a.first < b.first ? other : word;
        s.replace(second.first, second.second - second.first, first_word);
        s.replace(first.first, first.second - first.first, second_word);
      }
      break;
    }
    case 7: {  // drop a parenthesis
      std::vector<std::size_t> parens;
      for (std::size_t k = 0; k < s.size(); ++k) {
        if (s[k] == '(' || s[k] == ')') parens.push_back(k);
      }
      if (!parens.empty()) s.erase(parens[pick(parens.size())], 1);
      break;
    }
    case 8:  // splice in a language token
      s.insert(pick(s.size() + 1), kTokens[pick(kTokens.size())]);
      break;
    default: {  // truncate or cut out a whole line
      if (random() % 4 == 0) {
        s.resize(pick(s.size() + 1));
      } else {
        const std::size_t at = pick(s.size() + 1);
        const std::size_t line_begin = s.rfind('\n', at == 0 ? 0 : at - 1);
        const std::size_t begin = line_begin == std::string::npos ? 0 : line_begin;
        const std::size_t line_end = s.find('\n', at);
        s.erase(begin, (line_end == std::string::npos ? s.size() : line_end) - begin);
      }
      break;
    }
  }
}

// --- watchdog and crash report ---------------------------------------------

// The input under test, kept where a signal handler or the watchdog can print it.
std::mutex g_input_mutex;
std::string g_input;
std::atomic<long long> g_call_started_ns{0};  // 0: no call in progress
std::atomic<bool> g_done{false};

void print_input_and_exit(const char* why) {
  // Only async-signal-safe calls: write(2) and _exit.
  const auto say = [](const char* s, std::size_t n) { (void)!::write(2, s, n); };
  say(why, std::char_traits<char>::length(why));
  const char* header = "\n--- fuzz input (between the markers) ---8<---\n";
  say(header, std::char_traits<char>::length(header));
  say(g_input.data(), g_input.size());
  const char* footer = "\n--->8---\n";
  say(footer, std::char_traits<char>::length(footer));
  ::_exit(3);
}

extern "C" void on_crash(int) { print_input_and_exit("fuzz: load_text crashed"); }

void watchdog() {
  while (!g_done.load()) {
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
    const long long started = g_call_started_ns.load();
    if (started == 0) continue;
    const long long now = Clock::now().time_since_epoch().count();
    if (static_cast<double>(now - started) * 1e-9 > kCallLimitSeconds * 5) {
      // Well past the per-call limit: a hang. Nothing can stop the call; end the run.
      std::lock_guard<std::mutex> lock(g_input_mutex);
      print_input_and_exit("fuzz: load_text did not return (hang)");
    }
  }
}

bool is_file_error(const Diagnostic& d) {
  const std::string& m = d.message;
  return m.find("file") != std::string::npos || m.find("include") != std::string::npos ||
         m.find("samples") != std::string::npos || m.find("CSV") != std::string::npos;
}

// An empty string when the result is acceptable, else what is wrong.
std::string check(const LoadResult& result, const std::string& file, const std::string& text) {
  const long line_count = static_cast<long>(std::count(text.begin(), text.end(), '\n')) + 1;
  for (const auto& d : result.diagnostics) {
    (void)render(d);  // must not throw
    if (d.where.file == file && d.where.line > line_count) {
      return "diagnostic points past the end of the file: " + render(d);
    }
  }
  if (result.ok()) return "";
  for (const auto& d : result.diagnostics) {
    if (d.severity != Severity::Error) continue;
    if (d.where.line >= 1 && d.where.column >= 1) return "";
    if (d.where.line >= 1 && is_file_error(d)) return "";
  }
  std::string out = "failed without a positioned error; diagnostics:\n";
  for (const auto& d : result.diagnostics) out += render(d);
  if (result.diagnostics.empty()) out += "(none)\n";
  return out;
}

double budget_seconds() {
  if (const char* env = std::getenv("RINGDOWN_FUZZ_SECONDS")) {
    char* end = nullptr;
    const double value = std::strtod(env, &end);
    if (end != env && value >= 0) return value;
  }
  return kDefaultBudgetSeconds;
}

TEST(ParserFuzz, ExamplesLoadCleanly) {
  // The unmutated examples are valid circuits (written to NETLIST.md).
  const auto list = examples();
  ASSERT_FALSE(list.empty()) << "no circuits/*.rlc found";
  for (const auto& example : list) {
    const LoadResult result = load_text(example.text, example.path);
    std::string all;
    for (const auto& d : result.diagnostics) all += render(d);
    EXPECT_TRUE(result.ok()) << example.path << "\n" << all;
  }
}

TEST(ParserFuzz, MutatedExamplesNeverCrashAndFailWithPositions) {
  const auto list = examples();
  ASSERT_FALSE(list.empty()) << "no circuits/*.rlc found";
  std::signal(SIGSEGV, on_crash);
  std::signal(SIGABRT, on_crash);
  std::signal(SIGFPE, on_crash);
  std::signal(SIGBUS, on_crash);
  g_done = false;
  std::thread guard(watchdog);

  std::mt19937_64 random(kSeed);
  const double budget = budget_seconds();
  const auto start = Clock::now();
  long cases = 0, accepted = 0, failures = 0;
  double slowest = 0;
  while (std::chrono::duration<double>(Clock::now() - start).count() < budget) {
    const Example& example = list[static_cast<std::size_t>(random() % list.size())];
    std::string text = example.text;
    const int mutations = 1 + static_cast<int>(random() % 6);
    for (int k = 0; k < mutations; ++k) mutate(text, random);
    {
      std::lock_guard<std::mutex> lock(g_input_mutex);
      g_input = text;
    }
    const auto call_start = Clock::now();
    g_call_started_ns = call_start.time_since_epoch().count();
    std::string problem;
    try {
      const LoadResult result = load_text(text, example.path);
      if (result.ok()) ++accepted;
      problem = check(result, example.path, text);
    } catch (const std::exception& e) {
      problem = std::string("load_text threw: ") + e.what();
    } catch (...) {
      problem = "load_text threw a non-standard exception";
    }
    g_call_started_ns = 0;
    const double seconds = std::chrono::duration<double>(Clock::now() - call_start).count();
    slowest = std::max(slowest, seconds);
    if (seconds > kCallLimitSeconds) {
      problem += "load_text took " + std::to_string(seconds) + " s";
    }
    ++cases;
    if (!problem.empty()) {
      ++failures;
      // Report the first few in full; the count tells the rest.
      if (failures <= 5) {
        ADD_FAILURE() << "case " << cases << " from " << example.path << ": " << problem
                      << "\n--- input ---8<---\n" << text << "\n--->8---";
      }
    }
  }
  g_done = true;
  guard.join();
  std::signal(SIGSEGV, SIG_DFL);
  std::signal(SIGABRT, SIG_DFL);
  std::signal(SIGFPE, SIG_DFL);
  std::signal(SIGBUS, SIG_DFL);
  std::printf("fuzz: %ld cases in %.1f s, %ld loaded ok, %ld failed checks, slowest %.3f s\n",
              cases, budget, accepted, failures, slowest);
  EXPECT_EQ(failures, 0);
  EXPECT_GT(cases, 0);
}

}  // namespace
}  // namespace ringdown
