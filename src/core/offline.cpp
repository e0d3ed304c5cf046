// Benjamini & Hochberg (1995) JRSS-B 57(1):289-300; Storey, Taylor & Siegmund (2004) JRSS-B 66(1);
// Wang & Ramdas (2022) JRSS-B 84(3) for e-BH.
#include "alphaledger/offline.hpp"

#include <algorithm>
#include <functional>
#include <limits>
#include <numeric>

namespace alphaledger {
namespace {

OfflineDecisions step_up(const std::vector<double>& p, double level, double cap, double pi0) {
  OfflineDecisions out;
  out.null_proportion = pi0;
  const std::size_t m = p.size();
  out.rejected.assign(m, false);
  if (m == 0) return out;
  std::vector<double> sorted = p;
  std::sort(sorted.begin(), sorted.end());
  const double md = static_cast<double>(m);
  std::size_t k = 0;
  for (std::size_t i = m; i >= 1; --i) {
    const double line = static_cast<double>(i) * level / md;
    if (sorted[i - 1] <= std::min(cap, line)) {
      k = i;
      break;
    }
  }
  out.threshold = std::min(cap, static_cast<double>(std::max<std::size_t>(k, 1)) * level / md);
  for (std::size_t i = 0; i < m; ++i) {
    out.rejected[i] = k > 0 && p[i] <= out.threshold;
    out.rejections += out.rejected[i] ? 1 : 0;
  }
  return out;
}

}  // namespace

OfflineDecisions benjamini_hochberg(const std::vector<double>& p, double alpha) {
  return step_up(p, alpha, 1.0, 1.0);
}

OfflineDecisions storey_bh(const std::vector<double>& p, double alpha, double lambda) {
  const auto above =
      static_cast<double>(std::count_if(p.begin(), p.end(), [&](double x) { return x > lambda; }));
  const double m = static_cast<double>(std::max<std::size_t>(p.size(), 1));
  const double pi0 = std::min(1.0, (1.0 + above) / (m * (1.0 - lambda)));
  return step_up(p, alpha / pi0, lambda, pi0);
}

OfflineDecisions e_benjamini_hochberg(const std::vector<double>& e, double alpha) {
  OfflineDecisions out;
  const std::size_t m = e.size();
  out.rejected.assign(m, false);
  out.threshold = std::numeric_limits<double>::infinity();
  if (m == 0) return out;
  std::vector<double> sorted = e;
  std::sort(sorted.begin(), sorted.end(), std::greater<>());
  const double md = static_cast<double>(m);
  std::size_t k = 0;
  for (std::size_t i = m; i >= 1; --i) {
    if (sorted[i - 1] >= md / (alpha * static_cast<double>(i))) {
      k = i;
      break;
    }
  }
  if (k == 0) return out;
  out.threshold = md / (alpha * static_cast<double>(k));
  for (std::size_t i = 0; i < m; ++i) {
    out.rejected[i] = e[i] >= out.threshold;
    out.rejections += out.rejected[i] ? 1 : 0;
  }
  return out;
}

}  // namespace alphaledger
