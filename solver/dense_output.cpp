// Dense output: the engine's checkpoints as a Trajectory, and the modal view (see
// dense_output.hpp for what this does and does not do).
//
// Partial steps: the value at t = t_c + h needs only the output rows carried over h,
// O expm(M h) X_c. A length met once is stepped by the action of the exponential on X_c (a
// few products, propagation.hpp); a length met again (the figures scan every sample
// interval at the same fractions of the output step, Gauss nodes included) gets its rows
// O expm(M h) and O M expm(M h) cached per (segment, length rounded to the time
// resolution): by actions of the transposed exponential on each row, or from a dense
// propagator when the step is stiff (the action would take more than ten products per
// state) or the rows are many. A recurring instant then costs one product of length N per
// base signal, not an N x N product.
//
// Thread safety: every const query takes one internal mutex (the caches and the memo of the
// last instant are shared), so a trajectory may be read from several threads; the calls are
// serialised.
#include "solver/dense_output.hpp"

#include <Eigen/Eigenvalues>
#include <algorithm>
#include <array>
#include <atomic>
#include <cmath>
#include <cstdint>
#include <exception>
#include <limits>
#include <mutex>
#include <numbers>
#include <unordered_map>

namespace ringdown::solver {

namespace {

std::atomic<double> g_budget{kDenseBudgetBytes};

// A length taken this many times gets its output rows O expm(M h) (a step whose action takes
// more than this many products per state is stiff and gets them at once from a dense
// propagator; Al-Mohy & Higham 2011, sec. 6, and the engine's measurements).
constexpr int kRowsAfterUses = 2;
constexpr double kActionLimitPerState = 10.0;
// Output rows the trajectory caches, bytes; the cache is emptied when it would grow past
// this (common practice, no source).
constexpr double kCacheBytes = 64.0 * 1024 * 1024;
// V is treated as singular below this reciprocal condition estimate (Higham, Accuracy and
// Stability of Numerical Algorithms, 2002, ch. 7; from memory; as modes.cpp).
constexpr double kInvertibleRcond = 1e-14;

struct Key {
  int segment;
  long long length;
  bool operator==(const Key& o) const { return segment == o.segment && length == o.length; }
};
struct KeyHash {
  std::size_t operator()(const Key& k) const {
    return std::hash<long long>()(k.length) * 31u + std::hash<int>()(k.segment);
  }
};
struct Entry {
  // The output rows carried over the length: O expm(M h) and O M expm(M h), so that a
  // recurring length costs one small product per base signal (no state at t is formed).
  Eigen::MatrixXd OP, OMP;
  TaylorPlan plan;
  int uses = 0;
  bool action_only = false;  // the rows could not be formed: the action on X every time
};

// The transposed system: expm(M^T h) u = expm(M h)^T u, by the same action. Its balanced
// form is the transpose of M's with the reciprocal scale (D^-1 M D)^T = D M^T D^-1.
AugmentedSystem transposed(const AugmentedSystem& sys) {
  AugmentedSystem t;
  t.states = sys.states;
  t.M = sys.M.transpose();
  t.balanced = sys.balanced.transpose();
  t.scale = sys.scale.cwiseInverse();
  t.shift = sys.shift;
  Eigen::MatrixXd shifted = t.balanced;
  shifted.diagonal().array() -= t.shift;
  t.shifted_norm1 = shifted.rows() > 0 ? shifted.cwiseAbs().colwise().sum().maxCoeff() : 0.0;
  t.use_sparse = sys.use_sparse;
  if (t.use_sparse) {
    t.sparse_shifted = shifted.sparseView(0.0, 0.0);
    t.sparse_shifted.makeCompressed();
  }
  return t;
}

class DenseTrajectory final : public Trajectory {
 public:
  explicit DenseTrajectory(DenseParts p) : p_(std::move(p)) {
    OM_.reserve(p_.segments.size());
    trans_.resize(p_.segments.size());
    for (const DenseSegment& s : p_.segments) OM_.push_back(s.O * s.sys.M);
    for (double t : p_.checkpoints.lt)
      if (t > 0 && t < p_.end && (corners_.empty() || corners_.back() != t)) corners_.push_back(t);
    std::size_t depth = 1;
    used_.resize(p_.programs.size());
    for (std::size_t k = 0; k < p_.programs.size(); ++k) {
      depth = std::max(depth, p_.programs[k].size());
      for (const Instr& in : p_.programs[k])
        if (in.kind == Instr::Load &&
            std::find(used_[k].begin(), used_[k].end(), in.base) == used_[k].end())
          used_[k].push_back(in.base);
    }
    sv_.assign(depth, 0.0);
    sd_.assign(depth, 0.0);
    base_.assign(p_.bases, 0.0);
    dbase_.assign(p_.bases, 0.0);
    base_ok_.assign(p_.bases, 0);
    dbase_ok_.assign(p_.bases, 0);
  }

  double start() const override { return 0; }
  double end() const override { return p_.end; }
  std::vector<double> corners() const override { return corners_; }
  std::vector<double> sample_times() const override {
    std::vector<double> out(static_cast<std::size_t>(p_.samples) + 1);
    for (long k = 0; k <= p_.samples; ++k)
      out[static_cast<std::size_t>(k)] = static_cast<double>(k) * p_.every;
    return out;
  }
  double value(std::size_t k, double t) const override { return evaluate(k, t, false, false); }
  double derivative(std::size_t k, double t) const override { return evaluate(k, t, false, true); }
  // One pass over the checkpoints. Consecutive checkpoints of one segment lie back to back
  // in memory, so the bases the signals load come as one product per run of them,
  // (rows of O) x [X_i X_i+1 ...], instead of a dot product per base and sample; the
  // programs then run on those bases. A sample that is no checkpoint (the memory budget
  // strides them) is looked up like any instant.
  void at_samples(const std::size_t* signals, std::size_t count, double* values,
                  double* derivatives) const override {
    std::lock_guard<std::mutex> lock(mutex_);
    memo_valid_ = false;  // base_ is overwritten below
    const auto n = static_cast<std::size_t>(p_.samples) + 1;
    const DenseRecorder& c = p_.checkpoints;
    std::vector<int> bases;
    for (std::size_t j = 0; j < count; ++j) {
      if (signals[j] >= p_.programs.size()) continue;
      for (int b : used_[signals[j]])
        if (std::find(bases.begin(), bases.end(), b) == bases.end()) bases.push_back(b);
    }
    // A signal that is one base as it is (a node voltage, most often) is copied from the
    // product; the others run their programs on the bases.
    constexpr Eigen::Index kProgram = -1;
    std::vector<Eigen::Index> direct(count, kProgram);
    bool programs = false;
    for (std::size_t j = 0; j < count; ++j) {
      if (signals[j] >= p_.programs.size()) continue;
      const std::vector<Instr>& code = p_.programs[signals[j]];
      if (code.size() == 1 && code[0].kind == Instr::Load)
        direct[j] = static_cast<Eigen::Index>(std::find(bases.begin(), bases.end(), code[0].base) - bases.begin());
      else
        programs = true;
    }
    const auto put = [&](std::size_t k, const Eigen::MatrixXd& Y, const Eigen::MatrixXd& dY,
                         Eigen::Index col) {
      if (programs)
        for (std::size_t m = 0; m < bases.size(); ++m) {
          const auto b = static_cast<std::size_t>(bases[m]);
          base_[b] = Y(static_cast<Eigen::Index>(m), col);
          if (derivatives) dbase_[b] = dY(static_cast<Eigen::Index>(m), col);
        }
      for (std::size_t j = 0; j < count; ++j) {
        if (signals[j] >= p_.programs.size()) {
          values[j * n + k] = std::numeric_limits<double>::quiet_NaN();
          if (derivatives) derivatives[j * n + k] = std::numeric_limits<double>::quiet_NaN();
        } else if (direct[j] != kProgram) {
          values[j * n + k] = Y(direct[j], col);
          if (derivatives) derivatives[j * n + k] = dY(direct[j], col);
        } else {
          const std::vector<Instr>& code = p_.programs[signals[j]];
          values[j * n + k] = run_program(code, base_.data(), sv_.data());
          if (derivatives) derivatives[j * n + k] = run_dual(code);
        }
      }
    };
    // The checkpoint of every sample, or none.
    constexpr std::size_t kNone = static_cast<std::size_t>(-1);
    std::vector<std::size_t> checkpoint(n, kNone);
    for (std::size_t k = 0, i = 0; k < n; ++k) {
      const double t = std::clamp(static_cast<double>(k) * p_.every, 0.0, p_.end);
      while (i + 1 < c.t.size() && c.t[i + 1] <= t) ++i;
      if (i < c.t.size() && c.t[i] == t) checkpoint[k] = i;
    }
    Eigen::MatrixXd rows, drows, Y, dY;
    std::size_t k = 0;
    for (std::size_t i0 = 0; i0 < c.t.size();) {
      // A run [i0, i1) of one segment and state size, at most kColumns long.
      std::size_t i1 = i0 + 1;
      while (i1 < c.t.size() && i1 - i0 < kColumns && c.segment[i1] == c.segment[i0] &&
             c.size[i1] == c.size[i0] && c.offset[i1] == c.offset[i1 - 1] + c.size[i1 - 1])
        ++i1;
      // The samples whose checkpoints lie in the run (samples are in time order, so are
      // their checkpoints); those before it without a checkpoint are looked up.
      while (k < n && (checkpoint[k] == kNone || checkpoint[k] < i0)) {
        if (checkpoint[k] == kNone) lookup(signals, count, values, derivatives, n, k);
        ++k;
      }
      if (k < n && checkpoint[k] < i1) {
        const auto g = static_cast<std::size_t>(c.segment[i0]);
        const auto states = static_cast<Eigen::Index>(c.size[i0]);
        const Eigen::Map<const Eigen::MatrixXd> X(c.data.data() + c.offset[i0], states,
                                                  static_cast<Eigen::Index>(i1 - i0));
        rows.resize(static_cast<Eigen::Index>(bases.size()), states);
        for (std::size_t m = 0; m < bases.size(); ++m)
          rows.row(static_cast<Eigen::Index>(m)) = p_.segments[g].O.row(bases[m]);
        Y.noalias() = rows * X;
        if (derivatives) {
          drows.resize(rows.rows(), states);
          for (std::size_t m = 0; m < bases.size(); ++m)
            drows.row(static_cast<Eigen::Index>(m)) = OM_[g].row(bases[m]);
          dY.noalias() = drows * X;
        }
        for (; k < n && (checkpoint[k] == kNone || checkpoint[k] < i1); ++k) {
          if (checkpoint[k] == kNone) {
            lookup(signals, count, values, derivatives, n, k);
            continue;
          }
          put(k, Y, dY, static_cast<Eigen::Index>(checkpoint[k] - i0));
        }
      }
      i0 = i1;
    }
    for (; k < n; ++k) lookup(signals, count, values, derivatives, n, k);
    memo_valid_ = false;
  }
  double value_before(std::size_t k, double t) const override {
    return evaluate(k, t, true, false);
  }
  double derivative_before(std::size_t k, double t) const override {
    return evaluate(k, t, true, true);
  }
  double bracket_step() const override { return p_.bracket_step; }

 private:
  double evaluate(std::size_t k, double t, bool left, bool want_derivative) const {
    std::lock_guard<std::mutex> lock(mutex_);
    return evaluate_locked(k, t, left, want_derivative);
  }
  double evaluate_locked(std::size_t k, double t, bool left, bool want_derivative) const {
    if (k >= p_.programs.size()) return std::numeric_limits<double>::quiet_NaN();
    t = std::clamp(t, 0.0, p_.end);
    if (!(memo_valid_ && memo_t_ == t && memo_left_ == left)) locate(t, left);
    for (int b : used_[k]) {
      const auto bi = static_cast<std::size_t>(b);
      if (!base_ok_[bi]) {
        base_[bi] = rows_->row(b).dot(state());
        base_ok_[bi] = 1;
      }
      if (want_derivative && !dbase_ok_[bi]) {
        dbase_[bi] = drows_->row(b).dot(state());
        dbase_ok_[bi] = 1;
      }
    }
    return want_derivative ? run_dual(p_.programs[k]) : run_program(p_.programs[k], base_.data(), sv_.data());
  }

  // at_samples() for one sample k that has no checkpoint of its own.
  void lookup(const std::size_t* signals, std::size_t count, double* values, double* derivatives,
              std::size_t n, std::size_t k) const {
    const double t = std::clamp(static_cast<double>(k) * p_.every, 0.0, p_.end);
    for (std::size_t j = 0; j < count; ++j) {
      values[j * n + k] = evaluate_locked(signals[j], t, false, false);
      if (derivatives) derivatives[j * n + k] = evaluate_locked(signals[j], t, false, true);
    }
    memo_valid_ = false;  // at_samples() writes base_ directly
  }
  // Checkpoints at_samples() multiplies at once (bounds its temporaries; common practice,
  // no source).
  static constexpr std::size_t kColumns = 1024;

  Eigen::Map<const Eigen::VectorXd> state() const {
    return {x_ptr_, static_cast<Eigen::Index>(x_size_)};
  }

  // Sets the memo to checkpoint i, itself at t or before it (then the caller propagates).
  void at_checkpoint(std::size_t i, double t) const {
    const DenseRecorder& c = p_.checkpoints;
    memo_valid_ = true;
    memo_t_ = t;
    memo_left_ = false;
    std::fill(base_ok_.begin(), base_ok_.end(), 0);
    std::fill(dbase_ok_.begin(), dbase_ok_.end(), 0);
    seg_ = c.segment[i];
    x_ptr_ = c.data.data() + c.offset[i];
    x_size_ = c.size[i];
    rows_ = &p_.segments[static_cast<std::size_t>(seg_)].O;
    drows_ = &OM_[static_cast<std::size_t>(seg_)];
  }

  // Sets the memo to X at t (left: the left limit), from the checkpoint before it.
  void locate(double t, bool left) const {
    memo_valid_ = true;
    memo_t_ = t;
    memo_left_ = left;
    std::fill(base_ok_.begin(), base_ok_.end(), 0);
    std::fill(dbase_ok_.begin(), dbase_ok_.end(), 0);
    const DenseRecorder& c = p_.checkpoints;
    if (left) {
      const auto it = std::lower_bound(c.lt.begin(), c.lt.end(), t);
      if (it != c.lt.end() && *it == t) {  // a stored left limit: exact, no propagation
        const auto i = static_cast<std::size_t>(it - c.lt.begin());
        seg_ = c.lsegment[i];
        x_ptr_ = c.ldata.data() + c.loffset[i];
        x_size_ = c.lsize[i];
        rows_ = &p_.segments[static_cast<std::size_t>(seg_)].O;
        drows_ = &OM_[static_cast<std::size_t>(seg_)];
        return;
      }
    }
    // Last checkpoint at or before t (strictly before for a left limit).
    auto it = left ? std::lower_bound(c.t.begin(), c.t.end(), t)
                   : std::upper_bound(c.t.begin(), c.t.end(), t);
    std::size_t i = it == c.t.begin() ? 0 : static_cast<std::size_t>(it - c.t.begin()) - 1;
    at_checkpoint(i, t);
    memo_left_ = left;
    const double h = t - c.t[i];
    if (!(h > 0)) return;
    const double* x = x_ptr_;
    const std::size_t n = x_size_;
    // An instant met again shortly after (a root finder's answer is one of its own iterates,
    // then asked for its value): the state it propagated to, kept, not a second propagation
    // that would count as a recurring length and buy output rows nobody reuses.
    const long long length = std::llround(h / p_.instant);
    for (const Recent& r : recent_)
      if (r.checkpoint == i && r.length == length) {
        x_ptr_ = r.state.data();
        return;
      }
    propagate(seg_, h, Eigen::Map<const Eigen::VectorXd>(x, static_cast<Eigen::Index>(n)));
    if (x_ptr_ == y_.data()) {  // propagated by the action: keep the state
      Recent& r = recent_[recent_next_];
      recent_next_ = (recent_next_ + 1) % recent_.size();
      r.checkpoint = i;
      r.length = length;
      r.state = y_;
      x_ptr_ = r.state.data();
    }
  }

  // Carries the checkpoint x over h in segment g: either the rows move (rows_ = O expm(M h),
  // x stays the checkpoint) or the state does (x_ptr_ = expm(M h) x).
  void propagate(int g, double h, const Eigen::Map<const Eigen::VectorXd>& x) const {
    const DenseSegment& seg = p_.segments[static_cast<std::size_t>(g)];
    const AugmentedSystem& sys = seg.sys;
    const Key key{g, std::llround(h / p_.instant)};
    Entry* e = &cache_[key];
    if (e->OP.size() > 0) {
      rows_ = &e->OP;
      drows_ = &e->OMP;
      return;
    }
    if (e->plan.m < 0) e->plan = plan_action(sys, h);
    ++e->uses;
    const auto N = static_cast<double>(sys.M.rows());
    const auto nb = static_cast<double>(seg.O.rows());
    const bool stiff = static_cast<double>(e->plan.products()) > kActionLimitPerState * N;
    if (!e->action_only && (stiff || e->uses >= kRowsAfterUses)) {
      const double bytes = 16.0 * nb * N;
      if (cache_bytes_ + bytes > kCacheBytes) {
        const Entry keep = *e;
        cache_.clear();
        cache_bytes_ = 0;
        e = &cache_[key];
        *e = keep;
      }
      // The rows by actions of the transposed exponential on each row (nb actions), or from
      // a dense propagator when the step is stiff or there are many rows.
      const bool by_actions =
          !stiff && nb * action_flops(sys, e->plan) < dense_propagator_flops(sys, h);
      if (by_actions) {
        if (!trans_[static_cast<std::size_t>(g)])
          trans_[static_cast<std::size_t>(g)] = std::make_unique<AugmentedSystem>(transposed(sys));
        const AugmentedSystem& ts = *trans_[static_cast<std::size_t>(g)];
        const TaylorPlan plan = plan_action(ts, h);
        e->OP.resize(seg.O.rows(), seg.O.cols());
        for (Eigen::Index b = 0; b < seg.O.rows(); ++b) {
          x_ = seg.O.row(b).transpose();
          expm_action(ts, h, plan, x_, y_, w1_, w2_);
          e->OP.row(b) = y_.transpose();
        }
      } else {
        Eigen::MatrixXd P;
        try {
          P = dense_propagator(sys, h);
        } catch (const std::exception&) {
          P.resize(0, 0);
        }
        if (P.size() > 0 && P.allFinite()) e->OP.noalias() = seg.O * P;
      }
      if (e->OP.size() > 0 && e->OP.allFinite()) {
        e->OMP.noalias() = e->OP * sys.M;  // O expm(Mh) M = O M expm(Mh): they commute
        cache_bytes_ += bytes;
        rows_ = &e->OP;
        drows_ = &e->OMP;
        return;
      }
      e->OP.resize(0, 0);
      e->action_only = true;  // fall back on the action, which is exact too
    }
    x_.resize(x.size());
    x_ = x;
    y_.resize(x.size());
    expm_action(sys, h, e->plan, x_, y_, w1_, w2_);
    x_ptr_ = y_.data();
  }

  // The program with forward-mode derivatives: (a b)' = a' b + a b', (a / b)' =
  // (a' b - a b') / b^2, (a^b)' = b a^(b-1) a' + a^b ln(a) b' (calculus).
  double run_dual(const std::vector<Instr>& code) const {
    int top = 0;
    double* v = sv_.data();
    double* d = sd_.data();
    for (const Instr& in : code) {
      switch (in.kind) {
        case Instr::Load:
          v[top] = base_[static_cast<std::size_t>(in.base)];
          d[top++] = dbase_[static_cast<std::size_t>(in.base)];
          break;
        case Instr::Const: v[top] = in.value; d[top++] = 0; break;
        case Instr::Neg: v[top - 1] = -v[top - 1]; d[top - 1] = -d[top - 1]; break;
        case Instr::Add: --top; v[top - 1] += v[top]; d[top - 1] += d[top]; break;
        case Instr::Sub: --top; v[top - 1] -= v[top]; d[top - 1] -= d[top]; break;
        case Instr::Mul:
          --top;
          d[top - 1] = d[top - 1] * v[top] + v[top - 1] * d[top];
          v[top - 1] *= v[top];
          break;
        case Instr::Div:
          --top;
          d[top - 1] = (d[top - 1] * v[top] - v[top - 1] * d[top]) / (v[top] * v[top]);
          v[top - 1] /= v[top];
          break;
        case Instr::Pow: {
          --top;
          const double a = v[top - 1], b = v[top], da = d[top - 1], db = d[top];
          const double p = std::pow(a, b);
          double dp = da == 0 ? 0.0 : b * std::pow(a, b - 1) * da;
          if (db != 0) dp += p * std::log(a) * db;
          v[top - 1] = p;
          d[top - 1] = dp;
          break;
        }
      }
    }
    return top > 0 ? d[top - 1] : 0.0;
  }

  DenseParts p_;
  std::vector<Eigen::MatrixXd> OM_;  // per segment: O M, the bases' derivatives
  std::vector<double> corners_;
  std::vector<std::vector<int>> used_;  // per signal: the bases its program loads

  mutable std::mutex mutex_;
  mutable std::unordered_map<Key, Entry, KeyHash> cache_;
  mutable std::vector<std::unique_ptr<AugmentedSystem>> trans_;  // per segment, when needed
  mutable double cache_bytes_ = 0;
  // Memo of the last instant asked (value and derivative of every signal at one t cost one
  // propagation).
  mutable bool memo_valid_ = false, memo_left_ = false;
  mutable double memo_t_ = 0;
  mutable int seg_ = 0;
  mutable const double* x_ptr_ = nullptr;
  mutable const Eigen::MatrixXd* rows_ = nullptr;   // base = rows_ x
  mutable const Eigen::MatrixXd* drows_ = nullptr;  // base' = drows_ x
  mutable std::size_t x_size_ = 0;
  mutable Eigen::VectorXd x_, y_, w1_, w2_;
  mutable std::vector<double> base_, dbase_, sv_, sd_;
  mutable std::vector<char> base_ok_, dbase_ok_;
  // The last few states reached by the action (checkpoint, length rounded to the time
  // resolution): kRecentStates of them (common practice, no source).
  struct Recent {
    std::size_t checkpoint = static_cast<std::size_t>(-1);
    long long length = 0;
    Eigen::VectorXd state;
  };
  static constexpr std::size_t kRecentStates = 4;
  mutable std::array<Recent, kRecentStates> recent_;
  mutable std::size_t recent_next_ = 0;
};

}  // namespace

double dense_budget_bytes() { return g_budget.load(); }
void set_dense_budget_bytes(double bytes) { g_budget.store(bytes > 0 ? bytes : kDenseBudgetBytes); }

long dense_stride(long samples, long events, long state_size, double budget) {
  const double per = 8.0 * static_cast<double>(std::max(1L, state_size));
  const double all = per * (static_cast<double>(samples) + 1 + 2.0 * static_cast<double>(events));
  if (all <= budget) return 1;
  const double room = budget - per * 2.0 * static_cast<double>(events);
  if (room < per) return std::max(1L, samples + 1);  // events alone fill it: keep sample 0 only
  const double s = std::ceil(per * (static_cast<double>(samples) + 1) / room);
  return static_cast<long>(std::min(s, static_cast<double>(std::max(1L, samples + 1))));
}

void DenseRecorder::keep(double at, int seg, const Eigen::VectorXd& X, bool left_limit) {
  const auto n = static_cast<std::size_t>(X.size());
  if (left_limit) {
    if (!lt.empty() && lt.back() == at) return;  // the first left limit at an instant counts
    lt.push_back(at);
    lsegment.push_back(seg);
    loffset.push_back(ldata.size());
    lsize.push_back(n);
    ldata.insert(ldata.end(), X.data(), X.data() + n);
    return;
  }
  if (!t.empty() && t.back() == at) {  // a later state at the same instant replaces it
    data.resize(offset.back());
    t.pop_back();
    segment.pop_back();
    offset.pop_back();
    size.pop_back();
  }
  t.push_back(at);
  segment.push_back(seg);
  offset.push_back(data.size());
  size.push_back(n);
  data.insert(data.end(), X.data(), X.data() + n);
}

std::size_t DenseRecorder::bytes() const {
  return sizeof(double) * (data.size() + ldata.size() + t.size() + lt.size()) +
         (sizeof(int) + 2 * sizeof(std::size_t)) * (t.size() + lt.size());
}

std::shared_ptr<const Trajectory> make_dense_trajectory(DenseParts parts) {
  return std::make_shared<const DenseTrajectory>(std::move(parts));
}

bool seen_modes(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C11, const Eigen::MatrixXd& Px,
                std::vector<SeenMode>& modes) {
  modes.clear();
  const Eigen::Index r = A.rows();
  if (r == 0) return true;
  Eigen::VectorXd d(r);
  for (Eigen::Index i = 0; i < r; ++i) {
    const double c = std::sqrt(std::abs(C11(i, i)));
    d(i) = c > 0 && std::isfinite(c) ? c : 1.0;
  }
  const Eigen::MatrixXd Az = d.asDiagonal() * A * d.cwiseInverse().asDiagonal();
  if (!Az.allFinite()) return false;
  Eigen::EigenSolver<Eigen::MatrixXd> es(Az, true);
  if (es.info() != Eigen::Success) return false;
  const Eigen::MatrixXcd V = es.eigenvectors();
  const Eigen::PartialPivLU<Eigen::MatrixXcd> lu(V);
  // A defective A has no basis of eigenvectors: every mode then counts as fully visible
  // wherever its right eigenvector reaches (the conservative reading).
  const bool invertible = lu.rcond() >= kInvertibleRcond;
  Eigen::VectorXd wnorm = Eigen::VectorXd::Ones(r);
  if (invertible) {
    const Eigen::MatrixXcd W = lu.inverse();
    for (Eigen::Index i = 0; i < r; ++i) wnorm(i) = W.row(i).norm();
  }
  const Eigen::MatrixXcd CV = (Px * d.cwiseInverse().asDiagonal()).cast<std::complex<double>>() * V;
  Eigen::MatrixXd raw(Px.rows(), r);
  for (Eigen::Index b = 0; b < Px.rows(); ++b)
    for (Eigen::Index i = 0; i < r; ++i) raw(b, i) = std::abs(CV(b, i)) * wnorm(i);
  Eigen::VectorXd row_max = raw.rowwise().maxCoeff();
  const auto& lam = es.eigenvalues();
  for (Eigen::Index i = 0; i < r; ++i) {
    if (lam(i).imag() < 0) continue;
    SeenMode m;
    m.pole = lam(i);
    m.visibility.resize(static_cast<std::size_t>(Px.rows()));
    for (Eigen::Index b = 0; b < Px.rows(); ++b)
      m.visibility[static_cast<std::size_t>(b)] =
          row_max(b) > 0 && std::isfinite(raw(b, i)) ? raw(b, i) / row_max(b) : (row_max(b) > 0 ? 1.0 : 0.0);
    modes.push_back(std::move(m));
  }
  return true;
}

double oscillation_bound(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C11) {
  const Eigen::Index r = A.rows();
  if (r == 0) return 0;
  Eigen::VectorXd d(r);
  for (Eigen::Index i = 0; i < r; ++i) {
    const double c = std::sqrt(std::abs(C11(i, i)));
    d(i) = c > 0 && std::isfinite(c) ? c : 1.0;
  }
  double best = 0;
  for (Eigen::Index j = 0; j < r; ++j) {
    double col = 0;
    for (Eigen::Index i = 0; i < r; ++i)
      col += std::abs(0.5 * (d(i) * A(i, j) / d(j) - d(j) * A(j, i) / d(i)));
    best = std::max(best, col);
  }
  return best;
}

}  // namespace ringdown::solver
