// The fitting steps behind the spending sequences' fast mode: nonnegative least squares, the
// geometric mixtures and their fits, and the stored fit of the default sequence (docs/methods.md
// sections 15.2-15.6; declared in src/core/spending_fit.hpp).
#include "core/spending_fit.hpp"

#include <algorithm>
#include <cmath>
#include <iterator>
#include <limits>
#include <numeric>

#include "core/math_policy.hpp"

namespace alphaledger {
namespace {

constexpr std::size_t kJmHeadLags = 16;  // docs/methods.md 15.4(b) hybrid: exact head L = 16

// The hybrid mixture of the default sequence "jm" as fit_hybrid_mixture() returns it (the derived
// vectors come from GeometricMixture::finish()). Fitting it (NNLS over 35 timescales) was about a
// quarter of the CPU time of a read command on a fast-mode stream (docs/benchmarks.md "CLI fixed
// cost"), so the default sequence uses these stored values; other jm:C are fitted on first use.
// tests/core/test_mixture_stored.cpp checks that a fresh fit gives exactly these bits.
constexpr double kJmHead[] = {
    0x1.c10c507b36102p-5, 0x1.869d74dd0393ep-7, 0x1.4cb1e2f9737e2p-7, 0x1.14ae797aaf299p-7,
    0x1.d523214895f4bp-8, 0x1.95d6d2501e78bp-8, 0x1.65132699c44a9p-8, 0x1.3e87941aec9d7p-8,
    0x1.1f5d496809ebdp-8, 0x1.05ace53d5f162p-8, 0x1.e04d2a3bc71e9p-9, 0x1.bbb931dfdf43fp-9,
    0x1.9c44c3c66087p-9,  0x1.80efc26869c4p-9,  0x1.68f8531d656a8p-9, 0x1.53c9244c518a9p-9,
};
constexpr double kJmWeight[] = {
    0x1.fb6aca6ed25f9p-7, 0x1.9fbd26f5415b8p-6, 0x1.e9f19cec637bdp-6, 0x1.089380d6e5612p-5,
    0x1.0fdccea23b9a3p-5, 0x1.1035b93c46f26p-5, 0x1.0c37785007246p-5, 0x1.05a6c8bc850dep-5,
    0x1.fb0e4fadf435cp-6, 0x1.e90ab4d18f924p-6, 0x1.d618a4a85d6a9p-6, 0x1.c2cd8b200c2c4p-6,
    0x1.af867cb0bf554p-6, 0x1.9c8a053d6cdfep-6, 0x1.89fd812960a6bp-6, 0x1.7806a6faa073bp-6,
    0x1.66aae04dac43dp-6, 0x1.560707c7dd9f3p-6, 0x1.4605b2a5f6237p-6, 0x1.36cf0eeb1210fp-6,
    0x1.2827e87f04bb5p-6, 0x1.1a64eeda67098p-6, 0x1.0cf5d55411c07p-6, 0x1.00a576404918cp-6,
    0x1.eb8eb3b601abp-7,  0x1.b091d0698403cp-7, 0x1.42aa5764556c9p-6, 0x1.0b33fd782cab1p-4,
};
constexpr double kJmRate[] = {
    0x1.999999999999ap-2,  0x1.7c3d2c4d63ff7p-3,  0x1.60fb8a566f626p-4,  0x1.47ae147ae147bp-5,
    0x1.3030f03de998fp-6,  0x1.1a62d511f2b54p-7,  0x1.0624dd2f1a9fcp-8,  0x1.e6b4b396428e4p-10,
    0x1.c3d154e984554p-11, 0x1.a36e2eb1c432dp-12, 0x1.855d5c78353f2p-13, 0x1.697443ee0377p-14,
    0x1.4f8b588e368f1p-15, 0x1.377de3935dcc1p-16, 0x1.2129cff19c5f3p-17, 0x1.0c6f7a0b5ed8dp-18,
    0x1.f26305b896134p-20, 0x1.cea94cb5c6febp-21, 0x1.ad7f29abcaf48p-22, 0x1.8eb59e2d44dc4p-23,
    0x1.72210a2b05989p-24, 0x1.5798ee2308c3ap-25, 0x1.3ef7b1bdd0af8p-26, 0x1.281a6e88d1478p-27,
    0x1.12e0be826d695p-28, 0x1.fe591c62e77f3p-30, 0x1.d9c3e40e1ba59p-31, 0x1.7b031cd8161e2p-34,
};

// Least squares on the columns `cols` of A (row-major, rows x ncols) by Householder QR.
std::vector<double> least_squares_subset(const std::vector<double>& a, std::size_t rows, std::size_t ncols,
                                         const std::vector<std::size_t>& cols, const std::vector<double>& b) {
  const std::size_t n = cols.size();
  std::vector<double> q(rows * n);  // column-major copy of the chosen columns
  for (std::size_t c = 0; c < n; ++c)
    for (std::size_t r = 0; r < rows; ++r) q[c * rows + r] = a[r * ncols + cols[c]];
  std::vector<double> y = b;
  for (std::size_t c = 0; c < n && c < rows; ++c) {
    double* col = &q[c * rows];
    double norm = 0;
    for (std::size_t r = c; r < rows; ++r) norm = std::hypot(norm, col[r]);
    if (norm == 0) continue;
    const double alpha = col[c] > 0 ? -norm : norm;
    std::vector<double> v(rows - c);
    for (std::size_t r = c; r < rows; ++r) v[r - c] = col[r];
    v[0] -= alpha;
    double vnorm2 = 0;
    for (double x : v) vnorm2 += x * x;
    if (vnorm2 == 0) continue;
    auto reflect = [&](double* target) {
      double dot = 0;
      for (std::size_t r = c; r < rows; ++r) dot += v[r - c] * target[r];
      const double f = 2 * dot / vnorm2;
      for (std::size_t r = c; r < rows; ++r) target[r] -= f * v[r - c];
    };
    for (std::size_t c2 = c; c2 < n; ++c2) reflect(&q[c2 * rows]);
    reflect(y.data());
  }
  std::vector<double> z(n, 0.0);
  for (std::size_t i = n; i-- > 0;) {
    if (i >= rows) continue;
    double s = y[i];
    for (std::size_t c = i + 1; c < n; ++c) s -= q[c * rows + i] * z[c];
    const double d = q[i * rows + i];
    z[i] = d != 0 ? s / d : 0;
  }
  return z;
}

}  // namespace

std::vector<double> nonnegative_least_squares(const std::vector<double>& a, std::size_t rows,
                                              std::size_t cols, const std::vector<double>& b) {
  std::vector<double> w(cols, 0.0);
  std::vector<bool> passive(cols, false);
  double scale = 0;
  for (double x : a) scale = std::max(scale, std::abs(x));
  const double tol = 1e-12 * std::max(scale, 1.0) * static_cast<double>(rows);
  for (std::size_t outer = 0; outer < 3 * cols + 10; ++outer) {
    std::vector<double> resid = b;
    for (std::size_t r = 0; r < rows; ++r)
      for (std::size_t c = 0; c < cols; ++c) resid[r] -= a[r * cols + c] * w[c];
    std::size_t best = cols;
    double best_grad = tol;
    for (std::size_t c = 0; c < cols; ++c) {
      if (passive[c]) continue;
      double g = 0;
      for (std::size_t r = 0; r < rows; ++r) g += a[r * cols + c] * resid[r];
      if (g > best_grad) {
        best_grad = g;
        best = c;
      }
    }
    if (best == cols) break;
    passive[best] = true;
    for (std::size_t inner = 0; inner < 3 * cols + 10; ++inner) {
      std::vector<std::size_t> idx;
      for (std::size_t c = 0; c < cols; ++c)
        if (passive[c]) idx.push_back(c);
      std::vector<double> z = least_squares_subset(a, rows, cols, idx, b);
      bool all_positive = true;
      for (double v : z) all_positive = all_positive && v > 0;
      if (all_positive) {
        std::fill(w.begin(), w.end(), 0.0);
        for (std::size_t i = 0; i < idx.size(); ++i) w[idx[i]] = z[i];
        break;
      }
      double step = 1.0;
      std::size_t blocking = idx.size();
      for (std::size_t i = 0; i < idx.size(); ++i) {
        if (z[i] <= 0) {
          const double wi = w[idx[i]];
          const double s = wi - z[i] > 0 ? wi / (wi - z[i]) : 0.0;
          if (s < step || blocking == idx.size()) {
            step = std::min(step, s);
            blocking = i;
          }
        }
      }
      for (std::size_t i = 0; i < idx.size(); ++i) {
        const std::size_t c = idx[i];
        w[c] += step * (z[i] - w[c]);
        if (i == blocking || w[c] <= 0) {
          w[c] = 0;
          passive[c] = false;
        }
      }
    }
  }
  return w;
}

double GeometricMixture::gamma(std::uint64_t m) const {
  if (m == 0) return 0.0;
  if (m <= head.size()) return head[m - 1];
  const double lag = static_cast<double>(m - 1);
  double s = 0;
  for (std::size_t k = 0; k < weight.size(); ++k) s += coefficient[k] * std::exp(-lag * rate[k]);
  return s;
}

void GeometricMixture::finish() {
  one_minus_r.clear();
  ratio.clear();
  ratio_head.clear();
  coefficient.clear();
  const double l = static_cast<double>(head.size());
  for (std::size_t k = 0; k < weight.size(); ++k) {
    one_minus_r.push_back(-std::expm1(-rate[k]));
    ratio.push_back(std::exp(-rate[k]));
    ratio_head.push_back(std::exp(-l * rate[k]));
    coefficient.push_back(weight[k] * one_minus_r[k]);
  }
}

double GeometricMixture::total_mass() const {
  double s = 0;
  for (double h : head) s += h;
  const double lag = static_cast<double>(head.size());
  for (std::size_t k = 0; k < weight.size(); ++k) s += weight[k] * std::exp(-lag * rate[k]);
  return s;
}

GeometricMixture fit_power_mixture(double s, bool shifted, double h, double u_lo, double u_hi, double mass) {
  GeometricMixture m;
  const double z = shifted ? detail::zeta(s) - 1.0 : detail::zeta(s);
  const double g = detail::tgamma(s);
  const auto count = static_cast<std::size_t>(std::llround((u_hi - u_lo) / h)) + 1;
  double total = 0;
  for (std::size_t k = 0; k < count; ++k) {
    const double u = u_lo + static_cast<double>(k) * h;
    const double x = std::exp(u);
    double a = h * std::exp(s * u) / (g * z);
    if (shifted) a *= std::exp(-x);
    const double w = a / std::expm1(x);
    m.weight.push_back(w);
    m.rate.push_back(x);
    total += w;
  }
  for (double& w : m.weight) w *= mass / total;
  m.finish();
  return m;
}

// docs/methods.md 15.4(b): exact head of L lags, tail fitted by NNLS on log-spaced timescales.
GeometricMixture fit_hybrid_mixture(const SpendingSequence& seq) {
  GeometricMixture m;
  for (std::size_t j = 1; j <= kJmHeadLags; ++j) m.head.push_back(seq.gamma(j));
  std::vector<double> rates;
  for (int k = 0; k <= 34; ++k) rates.push_back(1.0 / (0.25 * std::pow(10.0, k / 3.0)));
  std::vector<std::uint64_t> grid;
  for (std::uint64_t j = kJmHeadLags + 1; j <= 60; ++j) grid.push_back(j);
  for (int i = 0; i <= 9 * 25; ++i) {
    const auto j = static_cast<std::uint64_t>(std::llround(std::pow(10.0, i / 25.0)));
    if (j > 60 && j != grid.back()) grid.push_back(j);
  }
  const std::size_t rows = grid.size();
  const std::size_t cols = rates.size();
  std::vector<double> a(rows * cols);
  std::vector<double> b(rows, 1.0);
  for (std::size_t r = 0; r < rows; ++r) {
    const double y = seq.gamma(grid[r]);
    const double lag = static_cast<double>(grid[r] - 1);
    for (std::size_t c = 0; c < cols; ++c)
      a[r * cols + c] = -std::expm1(-rates[c]) * std::exp(-lag * rates[c]) / y;
  }
  const std::vector<double> w = nonnegative_least_squares(a, rows, cols, b);
  for (std::size_t c = 0; c < cols; ++c) {
    if (w[c] <= 0) continue;
    m.weight.push_back(w[c]);
    m.rate.push_back(rates[c]);
  }
  m.finish();
  // Keep the sequence nonincreasing across the seam, and its mass below 1.
  const double seam_tail = m.gamma(kJmHeadLags + 1);
  if (seam_tail > m.head.back()) {
    for (double& x : m.weight) x *= m.head.back() / seam_tail;
  }
  const double mass = m.total_mass();
  if (mass > kMixtureMass) {
    double head_sum = 0;
    for (double x : m.head) head_sum += x;
    const double f = (kMixtureMass - head_sum) / (mass - head_sum);
    for (double& x : m.weight) x *= f;
  }
  m.finish();
  return m;
}

GeometricMixture stored_jm_mixture() {
  GeometricMixture m;
  m.head.assign(std::begin(kJmHead), std::end(kJmHead));
  m.weight.assign(std::begin(kJmWeight), std::end(kJmWeight));
  m.rate.assign(std::begin(kJmRate), std::end(kJmRate));
  m.finish();
  return m;
}

}  // namespace alphaledger
