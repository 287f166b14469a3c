// "Did you mean" suggestions: the closest candidate by edit distance
// (Levenshtein 1966, "Binary codes capable of correcting deletions,
// insertions and reversals"), accepted when the distance is small compared
// with the length of the name.
#pragma once

#include <string>
#include <vector>

namespace ringdown {

// Edit distance (Levenshtein with adjacent transpositions), with early exit
// once it exceeds `limit`.
int edit_distance(const std::string& a, const std::string& b, int limit);

// The best candidate within max(1, size/3) edits (case differences count as
// half an edit), or "" when none is close.
std::string suggest(const std::string& name, const std::vector<std::string>& candidates);

}  // namespace ringdown
