// A Trajectory (trajectory.hpp) from sampled data: a measured scope capture, so that the same
// figures (figures.hpp) can be computed on the bench and on the model.
//
// Each signal is its piecewise-linear interpolant through the samples: value() interpolates,
// derivative() is the slope of the segment (the right one at a sample), and every interior
// sample is a corner, so figures treat the kinks as the places where extrema may sit. This is
// the honest reading of a capture: nothing is invented between samples (no spline overshoot).
// All signals share one time base (the capture's time column), strictly increasing.
//
// Not here: reading CSV (parser/csv.hpp), aligning time bases, filtering noise.
#pragma once

#include <algorithm>
#include <cstddef>
#include <stdexcept>
#include <utility>
#include <vector>

#include "solver/trajectory.hpp"

namespace ringdown::solver {

class SampledTrajectory : public Trajectory {
 public:
  // time: strictly increasing, at least two points; values[k]: one per time.
  SampledTrajectory(std::vector<double> time, std::vector<std::vector<double>> values)
      : time_(std::move(time)), values_(std::move(values)) {
    if (time_.size() < 2) throw std::invalid_argument("a sampled trajectory needs two samples");
    for (const auto& v : values_)
      if (v.size() != time_.size()) throw std::invalid_argument("every signal needs one value per sample");
  }

  double start() const override { return time_.front(); }
  double end() const override { return time_.back(); }
  std::vector<double> corners() const override {
    return std::vector<double>(time_.begin() + 1, time_.end() - 1);
  }
  std::vector<double> sample_times() const override { return time_; }

  double value(std::size_t k, double t) const override {
    const std::size_t i = segment(t);
    const double t0 = time_[i], t1 = time_[i + 1];
    const double w = (t - t0) / (t1 - t0);
    return values_[k][i] + w * (values_[k][i + 1] - values_[k][i]);
  }
  double derivative(std::size_t k, double t) const override {
    const std::size_t i = segment(t);
    return (values_[k][i + 1] - values_[k][i]) / (time_[i + 1] - time_[i]);
  }
  double value_before(std::size_t k, double t) const override { return value(k, t); }
  double derivative_before(std::size_t k, double t) const override {
    const std::size_t i = segment_before(t);
    return (values_[k][i + 1] - values_[k][i]) / (time_[i + 1] - time_[i]);
  }

 private:
  // The segment [time_[i], time_[i+1]) holding t (the last one at the end).
  std::size_t segment(double t) const {
    const auto it = std::upper_bound(time_.begin(), time_.end(), t);
    std::size_t i = it == time_.begin() ? 0 : static_cast<std::size_t>(it - time_.begin()) - 1;
    return std::min(i, time_.size() - 2);
  }
  // The segment ending at or after t from the left: (time_[i], time_[i+1]].
  std::size_t segment_before(double t) const {
    const auto it = std::lower_bound(time_.begin(), time_.end(), t);
    std::size_t i = it == time_.begin() ? 0 : static_cast<std::size_t>(it - time_.begin()) - 1;
    return std::min(i, time_.size() - 2);
  }
  std::vector<double> time_;
  std::vector<std::vector<double>> values_;
};

}  // namespace ringdown::solver
