// Exponential-polynomial pieces -> (S, H, w0); see source_model.hpp.
#include "solver/source_model.hpp"

#include <cmath>
#include <map>
#include <utility>

namespace ringdown::solver {

SourcePiece source_piece(const std::vector<ExpPolyTerm>& terms, double time_scale) {
  // Group terms by (rate, omega >= 0); record the highest power in each.
  struct Group {
    int max_power = 0;
    std::vector<ExpPolyTerm> terms;
  };
  std::map<std::pair<double, double>, Group> groups;
  SourcePiece p;
  for (ExpPolyTerm t : terms) {
    if (t.coef == 0) continue;
    if (t.omega < 0) {  // cos(-w tau + phi) = cos(w tau - phi)
      t.omega = -t.omega;
      t.phase = -t.phase;
    }
    if (t.omega == 0 && t.phase != 0) {
      t.coef *= std::cos(t.phase);
      t.phase = 0;
    }
    if (t.rate == 0 && t.omega == 0 && t.power == 0) {
      p.constant += t.coef;
      continue;
    }
    Group& g = groups[{t.rate, t.omega}];
    g.max_power = std::max(g.max_power, t.power);
    g.terms.push_back(t);
  }
  // Sizes.
  int q = 0;
  for (const auto& [key, g] : groups) {
    const bool poly = key.first == 0 && key.second == 0;
    const bool complex_pair = key.second != 0;
    q += poly ? g.max_power : (complex_pair ? 2 : 1) * (g.max_power + 1);
  }
  p.S = Eigen::MatrixXd::Zero(q, q);
  p.feed = Eigen::VectorXd::Zero(q);
  p.H = Eigen::RowVectorXd::Zero(q);
  p.w0 = Eigen::VectorXd::Zero(q);
  const double inv_t0 = 1.0 / time_scale;
  int at = 0;
  for (const auto& [key, g] : groups) {
    const double rate = key.first;
    const double omega = key.second;
    // Factor mapping coef * tau^k to the basis element s^k/k!: T0^k k!.
    auto scale = [&](int k) {
      double f = 1;
      for (int i = 1; i <= k; ++i) f *= time_scale * i;
      return f;
    };
    if (rate == 0 && omega == 0) {
      // z_1..z_K; z_1' = (1/T0) * 1, z_k' = (1/T0) z_{k-1}.
      for (int k = 1; k <= g.max_power; ++k) {
        const int i = at + k - 1;
        if (k == 1) p.feed(i) = inv_t0;
        else p.S(i, i - 1) = inv_t0;
      }
      for (const auto& t : g.terms) p.H(at + t.power - 1) += t.coef * scale(t.power);
      at += g.max_power;
    } else if (omega == 0) {
      for (int k = 0; k <= g.max_power; ++k) {
        const int i = at + k;
        p.S(i, i) = rate;
        if (k > 0) p.S(i, i - 1) = inv_t0;
      }
      p.w0(at) = 1;
      for (const auto& t : g.terms) p.H(at + t.power) += t.coef * scale(t.power);
      at += g.max_power + 1;
    } else {
      for (int k = 0; k <= g.max_power; ++k) {
        const int c = at + 2 * k;
        const int s = c + 1;
        p.S(c, c) = rate;
        p.S(c, s) = -omega;
        p.S(s, c) = omega;
        p.S(s, s) = rate;
        if (k > 0) {
          p.S(c, c - 2) = inv_t0;
          p.S(s, s - 2) = inv_t0;
        }
      }
      p.w0(at) = 1;
      for (const auto& t : g.terms) {
        const double f = t.coef * scale(t.power);
        p.H(at + 2 * t.power) += f * std::cos(t.phase);
        p.H(at + 2 * t.power + 1) -= f * std::sin(t.phase);
      }
      at += 2 * (g.max_power + 1);
    }
  }
  return p;
}

InputSystem assemble_inputs(const std::vector<SourcePiece>& pieces) {
  InputSystem sys;
  int q = 1;  // the shared unit state
  for (const auto& p : pieces) {
    sys.offset.push_back(q);
    sys.size.push_back(static_cast<int>(p.S.rows()));
    q += static_cast<int>(p.S.rows());
  }
  const auto m = static_cast<Eigen::Index>(pieces.size());
  sys.S = Eigen::MatrixXd::Zero(q, q);
  sys.H = Eigen::MatrixXd::Zero(m, q);
  sys.w0 = Eigen::VectorXd::Zero(q);
  sys.w0(0) = 1;
  for (Eigen::Index j = 0; j < m; ++j) {
    const auto& p = pieces[static_cast<std::size_t>(j)];
    const int o = sys.offset[static_cast<std::size_t>(j)];
    const auto k = p.S.rows();
    sys.S.block(o, o, k, k) = p.S;
    sys.S.block(o, 0, k, 1) = p.feed;
    sys.H(j, 0) = p.constant;
    sys.w0.segment(o, k) = p.w0;
    sys.H.block(j, o, 1, k) = p.H;
  }
  return sys;
}

}  // namespace ringdown::solver
