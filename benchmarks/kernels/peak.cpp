// Peak floating-point rates of this core, for the benchmark's operation-count estimate of the
// machine's limit: independent fused multiply-adds (scalar, and 4-wide AVX when available), and
// the throughput and latency of scalar division and square root, which every pair interaction
// needs once each. Times are thread CPU time (a loaded machine steals wall time, not cycles). Prints one JSON object. Compiled on the fly by benchmarks/machine.py with
// g++ -O3 -mfma -ffp-contract=off -fno-tree-vectorize (scalar loops must stay scalar).
#include <cmath>
#include <cstdio>
#include <ctime>
#if defined(__FMA__)
#include <immintrin.h>
#endif

// Timed in this thread's CPU time, so that other processes on a shared machine do not count.
struct clk {
  using time_point = double;
  static double now() {
    timespec ts;
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
    return ts.tv_sec + 1e-9 * ts.tv_nsec;
  }
};

static double seconds_since(double t0) { return clk::now() - t0; }

// Opaque to the optimiser: keeps values in registers without letting the compiler fold them.
template <class T>
static inline void keep(T& v) { asm volatile("" : "+x"(v)); }

// 16 independent chains x <- fma(x, a, b): throughput-bound. Returns fused multiply-adds per second.
static double scalar_fma_rate(long iters) {
  double x[16];
  for (int i = 0; i < 16; ++i) x[i] = 1.0 + i * 1e-3;
  double a = 0.999999999, b = 1e-9;
  keep(a);
  keep(b);
  const auto t0 = clk::now();
  for (long it = 0; it < iters; ++it) {
#define F(i) x[i] = std::fma(x[i], a, b); keep(x[i]);
    F(0) F(1) F(2) F(3) F(4) F(5) F(6) F(7) F(8) F(9) F(10) F(11) F(12) F(13) F(14) F(15)
#undef F
  }
  const double s = seconds_since(t0);
  double sum = 0;
  for (double v : x) sum += v;
  if (sum == 42.0) std::puts("");
  return 16.0 * iters / s;
}

#if defined(__FMA__)
static double vector_fma_rate(long iters) {  // 12 independent 4-wide chains; per double
  __m256d x[12];
  for (int i = 0; i < 12; ++i) x[i] = _mm256_set1_pd(1.0 + i * 1e-3);
  __m256d a = _mm256_set1_pd(0.999999999), b = _mm256_set1_pd(1e-9);
  keep(a);
  keep(b);
  const auto t0 = clk::now();
  for (long it = 0; it < iters; ++it) {
#define F(i) x[i] = _mm256_fmadd_pd(x[i], a, b); keep(x[i]);
    F(0) F(1) F(2) F(3) F(4) F(5) F(6) F(7) F(8) F(9) F(10) F(11)
#undef F
  }
  const double s = seconds_since(t0);
  double out[4], sum = 0;
  for (auto& v : x) {
    _mm256_storeu_pd(out, v);
    sum += out[0];
  }
  if (sum == 42.0) std::puts("");
  return 48.0 * iters / s;
}
#endif

// Division and square root: 8 independent chains (throughput) and one dependent chain (latency).
static double div_rate(long iters) {
  double x[8];
  for (int i = 0; i < 8; ++i) x[i] = 1.5 + i * 1e-3;
  double c = 1.0000001;
  keep(c);
  const auto t0 = clk::now();
  for (long it = 0; it < iters; ++it) {
#define F(i) x[i] = c / x[i]; keep(x[i]);
    F(0) F(1) F(2) F(3) F(4) F(5) F(6) F(7)
#undef F
  }
  const double s = seconds_since(t0);
  if (x[0] + x[7] == 42.0) std::puts("");
  return 8.0 * iters / s;
}

static double sqrt_rate(long iters) {
  double x[8];
  for (int i = 0; i < 8; ++i) x[i] = 1.5 + i * 1e-3;
  const auto t0 = clk::now();
  for (long it = 0; it < iters; ++it) {
#define F(i) x[i] = std::sqrt(x[i]) + 0.5; keep(x[i]);
    F(0) F(1) F(2) F(3) F(4) F(5) F(6) F(7)
#undef F
  }
  const double s = seconds_since(t0);
  if (x[0] + x[7] == 42.0) std::puts("");
  return 8.0 * iters / s;  // counts the sqrt; the add beside it runs on another port
}

static double div_latency_ns(long iters) {
  double x = 1.5, c = 1.0000001;
  keep(c);
  const auto t0 = clk::now();
  for (long it = 0; it < iters; ++it) {
    x = c / x;
    keep(x);
  }
  const double s = seconds_since(t0);
  if (x == 42.0) std::puts("");
  return 1e9 * s / iters;
}

static double sqrt_latency_ns(long iters) {
  double x = 1.5;
  const auto t0 = clk::now();
  for (long it = 0; it < iters; ++it) {
    x = std::sqrt(x) + 0.5;  // includes one dependent add
    keep(x);
  }
  const double s = seconds_since(t0);
  if (x == 42.0) std::puts("");
  return 1e9 * s / iters;
}

template <class F>
static double best_of(F f, int repeats = 3) {
  double best = 0;
  for (int r = 0; r < repeats; ++r) {
    const double v = f();
    if (v > best) best = v;
  }
  return best;
}

template <class F>
static double least_of(F f, int repeats = 3) {
  double best = 1e300;
  for (int r = 0; r < repeats; ++r) {
    const double v = f();
    if (v < best) best = v;
  }
  return best;
}

int main() {
  const double fma_s = best_of([] { return scalar_fma_rate(20000000); });
#if defined(__FMA__)
  const double fma_v = best_of([] { return vector_fma_rate(10000000); });
#else
  const double fma_v = 0.0;
#endif
  const double dv = best_of([] { return div_rate(5000000); });
  const double sq = best_of([] { return sqrt_rate(5000000); });
  const double dl = least_of([] { return div_latency_ns(5000000); });
  const double sl = least_of([] { return sqrt_latency_ns(5000000); });
  std::printf(
      "{\"scalar_fma_per_s\": %.6g, \"vector_fma_per_s\": %.6g, \"div_per_s\": %.6g, "
      "\"sqrt_per_s\": %.6g, \"div_latency_ns\": %.6g, \"sqrt_latency_ns\": %.6g}\n",
      fma_s, fma_v, dv, sq, dl, sl);
  return 0;
}
