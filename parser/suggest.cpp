// Edit-distance suggestions (see suggest.hpp).
#include "parser/suggest.hpp"

#include <algorithm>
#include <cctype>
#include <cstdlib>

namespace ringdown {

int edit_distance(const std::string& a, const std::string& b, int limit) {
  // Optimal string alignment distance: Levenshtein plus adjacent
  // transpositions (Damerau 1964), since "Rbsae" for "Rbase" is one slip.
  const int n = static_cast<int>(a.size());
  const int m = static_cast<int>(b.size());
  if (std::abs(n - m) > limit) return limit + 1;
  std::vector<int> two(m + 1), prev(m + 1), cur(m + 1);
  for (int j = 0; j <= m; ++j) prev[j] = j;
  for (int i = 1; i <= n; ++i) {
    cur[0] = i;
    int row_min = cur[0];
    for (int j = 1; j <= m; ++j) {
      const int cost = a[i - 1] == b[j - 1] ? 0 : 1;
      cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + cost});
      if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1]) {
        cur[j] = std::min(cur[j], two[j - 2] + 1);
      }
      row_min = std::min(row_min, cur[j]);
    }
    if (row_min > limit) return limit + 1;
    two = prev;
    std::swap(prev, cur);
  }
  return prev[m];
}

std::string suggest(const std::string& name, const std::vector<std::string>& candidates) {
  const int limit = std::max(1, static_cast<int>(name.size()) / 3);
  std::string lower_name = name;
  for (char& c : lower_name) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  std::string best;
  int best_score = 2 * limit + 1;
  for (const std::string& c : candidates) {
    if (c == name) continue;
    std::string lower = c;
    for (char& ch : lower) ch = static_cast<char>(std::tolower(static_cast<unsigned char>(ch)));
    int d = edit_distance(lower_name, lower, limit);
    if (d > limit) continue;
    // Score in half edits: a name that differs only in case scores 1.
    int score = 2 * d + (lower == lower_name ? 1 : (edit_distance(name, c, limit + 2) > d ? 1 : 0));
    if (score < best_score) {
      best_score = score;
      best = c;
    }
  }
  return best;
}

}  // namespace ringdown
