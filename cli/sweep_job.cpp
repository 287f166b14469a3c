// See sweep_job.hpp. A plain little-endian-agnostic byte copy: every rank of one run is the
// same binary on the same kind of machine (docs/cluster.md), so values are copied as they
// are in memory; strings and vectors carry a 64-bit length first.
#include "cli/sweep_job.hpp"

#include <cstring>
#include <type_traits>

namespace ringdown::cli {

namespace {

class Writer {
 public:
  explicit Writer(std::vector<std::uint8_t>& bytes) : bytes_(bytes) {}
  template <typename T>
  void raw(const T& v) {
    static_assert(std::is_trivially_copyable_v<T>);
    const auto* p = reinterpret_cast<const std::uint8_t*>(&v);
    bytes_.insert(bytes_.end(), p, p + sizeof(T));
  }
  void size(std::size_t n) { raw(static_cast<std::uint64_t>(n)); }
  void text(const std::string& s) {
    size(s.size());
    bytes_.insert(bytes_.end(), s.begin(), s.end());
  }
  void doubles(const std::vector<double>& v) {
    size(v.size());
    for (double x : v) raw(x);
  }
  void unit(const Unit& u) {
    raw(static_cast<std::uint8_t>(u.has_value()));
    if (u) raw(*u);
  }
  void figure(const solver::FigureValue& f) {
    raw(f.value);
    unit(f.unit);
    text(f.note);
    raw(static_cast<std::uint8_t>(f.ok));
    text(f.error);
  }
  void diagnostic(const Diagnostic& d) {
    raw(static_cast<std::int32_t>(d.severity));
    text(d.where.file);
    raw(static_cast<std::int32_t>(d.where.line));
    raw(static_cast<std::int32_t>(d.where.column));
    raw(static_cast<std::int32_t>(d.where.length));
    text(d.where.source_line);
    text(d.message);
    text(d.hint);
  }

 private:
  std::vector<std::uint8_t>& bytes_;
};

class Reader {
 public:
  Reader(const std::vector<std::uint8_t>& bytes, std::size_t& pos) : bytes_(bytes), pos_(pos) {}
  bool ok() const { return ok_; }
  template <typename T>
  T raw() {
    static_assert(std::is_trivially_copyable_v<T>);
    T v{};
    if (!ok_ || bytes_.size() - pos_ < sizeof(T)) {
      ok_ = false;
      return v;
    }
    std::memcpy(&v, bytes_.data() + pos_, sizeof(T));
    pos_ += sizeof(T);
    return v;
  }
  // A count of items of at least `item` bytes each: refused when the rest cannot hold them.
  std::size_t size(std::size_t item = 1) {
    const auto n = raw<std::uint64_t>();
    if (!ok_ || n > (bytes_.size() - pos_) / item) {
      ok_ = false;
      return 0;
    }
    return static_cast<std::size_t>(n);
  }
  std::string text() {
    const std::size_t n = size();
    std::string s(reinterpret_cast<const char*>(bytes_.data() + pos_), ok_ ? n : 0);
    pos_ += ok_ ? n : 0;
    return s;
  }
  std::vector<double> doubles() {
    std::vector<double> v(size(sizeof(double)));
    for (double& x : v) x = raw<double>();
    return v;
  }
  Unit unit() {
    if (raw<std::uint8_t>() == 0) return std::nullopt;
    return raw<Dimension>();
  }
  solver::FigureValue figure() {
    solver::FigureValue f;
    f.value = raw<double>();
    f.unit = unit();
    f.note = text();
    f.ok = raw<std::uint8_t>() != 0;
    f.error = text();
    return f;
  }
  Diagnostic diagnostic() {
    Diagnostic d;
    d.severity = static_cast<Severity>(raw<std::int32_t>());
    d.where.file = text();
    d.where.line = raw<std::int32_t>();
    d.where.column = raw<std::int32_t>();
    d.where.length = raw<std::int32_t>();
    d.where.source_line = text();
    d.message = text();
    d.hint = text();
    return d;
  }

 private:
  const std::vector<std::uint8_t>& bytes_;
  std::size_t& pos_;
  bool ok_ = true;
};

}  // namespace

void encode(const JobResult& r, std::vector<std::uint8_t>& bytes) {
  Writer w(bytes);
  w.raw(static_cast<std::int32_t>(r.exit_code));
  w.size(r.diagnostics.size());
  for (const Diagnostic& d : r.diagnostics) w.diagnostic(d);
  w.doubles(r.drawn);
  w.size(r.reports.size());
  for (const auto& f : r.reports) w.figure(f);
  w.size(r.expect_values.size());
  for (const auto& f : r.expect_values) w.figure(f);
  w.size(r.expect_pass.size());
  for (bool b : r.expect_pass) w.raw(static_cast<std::uint8_t>(b));
  w.raw(static_cast<std::uint8_t>(r.pass));
  w.raw(static_cast<std::uint8_t>(r.hazard.has_value()));
  if (r.hazard) {
    const SafetyReport& s = *r.hazard;
    w.raw(static_cast<std::uint8_t>(s.hazardous));
    w.raw(s.band.ac_rms);
    w.raw(s.band.dc);
    w.raw(s.band.bleed_level);
    w.raw(static_cast<std::uint8_t>(s.band.accept_risk));
    w.size(s.points.size());
    for (const HazardPoint& p : s.points) {
      w.text(p.name);
      w.raw(p.peak);
      w.raw(p.instant);
      w.raw(p.ac_rms);
      w.raw(static_cast<std::uint8_t>(p.over_dc));
      w.raw(static_cast<std::uint8_t>(p.over_ac));
    }
    w.size(s.stored.size());
    for (const StoredCharge& c : s.stored) {
      w.text(c.capacitor);
      w.raw(c.voltage);
      w.raw(c.energy);
      w.raw(static_cast<std::uint8_t>(c.bleed_time.has_value()));
      w.raw(c.bleed_time.value_or(0.0));
      w.text(c.note);
    }
    w.text(s.limitation);
  }
  w.doubles(r.times);
  w.size(r.samples.size());
  for (const auto& s : r.samples) w.doubles(s);
}

bool decode(const std::vector<std::uint8_t>& bytes, std::size_t& pos, JobResult& r) {
  Reader in(bytes, pos);
  r = JobResult{};
  r.exit_code = in.raw<std::int32_t>();
  r.diagnostics.resize(in.size());
  for (Diagnostic& d : r.diagnostics) d = in.diagnostic();
  r.drawn = in.doubles();
  r.reports.resize(in.size());
  for (auto& f : r.reports) f = in.figure();
  r.expect_values.resize(in.size());
  for (auto& f : r.expect_values) f = in.figure();
  r.expect_pass.resize(in.size());
  for (std::size_t i = 0; i < r.expect_pass.size(); ++i) r.expect_pass[i] = in.raw<std::uint8_t>() != 0;
  r.pass = in.raw<std::uint8_t>() != 0;
  if (in.raw<std::uint8_t>() != 0) {
    SafetyReport s;
    s.hazardous = in.raw<std::uint8_t>() != 0;
    s.band.ac_rms = in.raw<double>();
    s.band.dc = in.raw<double>();
    s.band.bleed_level = in.raw<double>();
    s.band.accept_risk = in.raw<std::uint8_t>() != 0;
    s.points.resize(in.size());
    for (HazardPoint& p : s.points) {
      p.name = in.text();
      p.peak = in.raw<double>();
      p.instant = in.raw<double>();
      p.ac_rms = in.raw<double>();
      p.over_dc = in.raw<std::uint8_t>() != 0;
      p.over_ac = in.raw<std::uint8_t>() != 0;
    }
    s.stored.resize(in.size());
    for (StoredCharge& c : s.stored) {
      c.capacitor = in.text();
      c.voltage = in.raw<double>();
      c.energy = in.raw<double>();
      const bool has_time = in.raw<std::uint8_t>() != 0;
      const double t = in.raw<double>();
      if (has_time) c.bleed_time = t;
      c.note = in.text();
    }
    s.limitation = in.text();
    r.hazard = std::move(s);
  }
  r.times = in.doubles();
  r.samples.resize(in.size());
  for (auto& s : r.samples) s = in.doubles();
  return in.ok();
}

}  // namespace ringdown::cli
