// The extrapolation tableau of the Gragg-Bulirsch-Stoer method, generic over a flat vector of T:
// the step-number sequences, and Aitken-Neville polynomial extrapolation in h^2 of the INCREMENTS
// y(t + H) - y(t) produced by a symmetric substep with n_j substeps (HNW I, section II.9).
//
// Increments rather than states: the extrapolation weights amplify the round-off of whatever is
// extrapolated (by ~1e4 at 14 columns), so that round-off should be relative to the small increment,
// not to the large coordinate. The substep therefore accumulates the increment directly.
#pragma once

#include <cmath>
#include <limits>
#include <stdexcept>
#include <vector>

#include <loschmidt/methods/options.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

// Largest row count a sequence supports before n_j would get absurd (or overflow an int).
inline int sequence_max_rows(StepSequence seq) {
  switch (seq) {
    case StepSequence::harmonic: return 64;
    case StepSequence::bulirsch: return 36;
    case StepSequence::romberg: return 20;
    case StepSequence::consecutive: return 128;
  }
  return 64;
}

// n_j for rows j = 1, 2, ..., rows (returned with index 0 unused, so n[j] is row j).
inline std::vector<int> step_sequence(StepSequence seq, int rows) {
  if (rows < 1 || rows > sequence_max_rows(seq))
    throw std::invalid_argument("step_sequence: number of rows out of range for this sequence");
  std::vector<int> n(static_cast<std::size_t>(rows) + 1, 0);
  for (int j = 1; j <= rows; ++j) {
    switch (seq) {
      case StepSequence::harmonic: n[j] = 2 * j; break;
      case StepSequence::bulirsch: n[j] = (j <= 3) ? 2 * j : 2 * n[j - 2]; break;
      case StepSequence::romberg: n[j] = 1 << j; break;
      case StepSequence::consecutive: n[j] = j; break;
    }
  }
  return n;
}

// Per-component error scale sc_i = atol + rtol * max(|y0_i|, |y1_i|), kept in double (step-control
// arithmetic needs no more), with y1 = y0 + increment.
struct ErrorScale {
  double rtol = 0.0, atol = 0.0;
  // Number of components the RMS averages over; 0 means the tableau's dimension. A problem that
  // drops components known to be exactly zero (a planar system's z) keeps the full count here so
  // that its step control, and hence its bits, match the full problem.
  int count = 0;
  // Components the norm covers: those i with (i mod stride) < block; 0 means all. A problem that
  // carries passive components beside the state (the tangent vector of the variational
  // equations, gbs.hpp) keeps them out of the error control this way.
  int block = 0, stride = 0;
  std::vector<double> y0;  // to_double of the step's starting point

  template <class T>
  void start_at(const T* y, int dim) {
    y0.resize(static_cast<std::size_t>(dim));
    for (int i = 0; i < dim; ++i) y0[static_cast<std::size_t>(i)] = to_double(y[i]);
  }
};

// Aitken-Neville tableau over a flat vector of dim components. Row j (1-based) is written by the
// substep into slot(j); add_row(j) then extrapolates in place, after which slot(1) holds the
// diagonal T_{j,j} and slot(2) holds T_{j,j-1}. Storage is allocated once, in setup().
template <class T>
class ExtrapolationTableau {
 public:
  void setup(int dim, const std::vector<int>& n) {
    dim_ = dim;
    rows_ = static_cast<int>(n.size()) - 1;
    table_.assign(static_cast<std::size_t>(rows_) * static_cast<std::size_t>(dim_), T(0));
    weight_.assign(static_cast<std::size_t>(rows_ + 1) * static_cast<std::size_t>(rows_ + 1), T(0));
    // Neville in h^2: T_{j,k+1} = T_{j,k} + (T_{j,k} - T_{j-1,k}) / ((n_j / n_{j-k})^2 - 1);
    // stored as the exact ratio n_l^2 / (n_j^2 - n_l^2) with l = j - k, built in T from integers.
    for (int j = 2; j <= rows_; ++j)
      for (int l = 1; l < j; ++l) {
        const long long nj = n[static_cast<std::size_t>(j)], nl = n[static_cast<std::size_t>(l)];
        weight_[index(j, l)] = T(static_cast<double>(nl * nl)) / T(static_cast<double>(nj * nj - nl * nl));
      }
  }

  int dimension() const { return dim_; }
  int rows() const { return rows_; }

  T* slot(int j) { return table_.data() + static_cast<std::size_t>(j - 1) * static_cast<std::size_t>(dim_); }
  const T* slot(int j) const {
    return table_.data() + static_cast<std::size_t>(j - 1) * static_cast<std::size_t>(dim_);
  }
  // The best value after the last add_row: T_{j,j}.
  const T* diagonal() const { return slot(1); }

  // Extrapolate the freshly written row j (slots 1..j-1 hold T_{j-1,j-1}, ..., T_{j-1,1}) and return
  // the scaled RMS error estimate ||T_{j,j} - T_{j,j-1}|| (0 for j = 1, which has no estimate).
  // A component with zero scale and zero error is skipped; zero scale with nonzero error is infinite.
  double add_row(int j, const ErrorScale& sc) {
    if (j == 1) return 0.0;
    extrapolate(j);
    return scaled_error(sc);
  }

  // The extrapolation alone, for callers with their own error norm (read slot(1) and slot(2)).
  void extrapolate(int j) {
    if (j == 1) return;
    const T* w = &weight_[index(j, 0)];
    const std::size_t d = static_cast<std::size_t>(dim_);
    // Column by column (l outer): the d updates of one column are independent, so they pipeline;
    // carrying one component down all columns instead would chain every update on the previous
    // one (about 3x slower in double-double, measured).
    for (int l = j; l >= 2; --l) {
      const T* newer = slot(l);
      T* older = slot(l - 1);
      const T wl = w[l - 1];
      for (std::size_t i = 0; i < d; ++i) {
        const T cur = newer[i];
        older[i] = cur + (cur - older[i]) * wl;
      }
    }
  }

  // ||slot(1) - slot(2)|| in the scaled RMS norm of sc, after extrapolate(j) with j >= 2.
  // Only the components selected by sc.block / sc.stride count, in increasing index order.
  double scaled_error(const ErrorScale& sc) const {
    const std::size_t d = static_cast<std::size_t>(dim_);
    const std::size_t stride = sc.stride > 0 ? static_cast<std::size_t>(sc.stride) : d;
    const std::size_t block = sc.block > 0 ? static_cast<std::size_t>(sc.block) : stride;
    const T* best = slot(1);
    const T* next = slot(2);
    double sum = 0.0;
    for (std::size_t base = 0; base < d; base += stride) {
      const std::size_t end = base + block < d ? base + block : d;
      for (std::size_t i = base; i < end; ++i) {
        const double diff = approx_difference(best[i], next[i]);  // not formed in T: judged in double
        if (diff == 0.0) continue;
        const double y0 = sc.y0[i];
        const double y1 = y0 + to_double(best[i]);
        const double a0 = std::fabs(y0), a1 = std::fabs(y1);
        const double scale = sc.atol + sc.rtol * (a0 > a1 ? a0 : a1);
        if (!(scale > 0.0)) return std::numeric_limits<double>::infinity();
        const double q = diff / scale;
        sum += q * q;
      }
    }
    return std::sqrt(sum / static_cast<double>(sc.count > 0 ? sc.count : dim_));
  }

 private:
  std::size_t index(int j, int l) const {
    return static_cast<std::size_t>(j) * static_cast<std::size_t>(rows_ + 1) + static_cast<std::size_t>(l);
  }
  int dim_ = 0, rows_ = 0;
  std::vector<T> table_;
  std::vector<T> weight_;
};

}  // namespace loschmidt
