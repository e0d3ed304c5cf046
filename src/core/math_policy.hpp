// The one Boost.Math error policy of the library: errors become values we check (NaN or +-inf
// returned, errno untouched), never exceptions, so the core stays exception-free. Callers
// validate inputs before calling (DEVELOPERS.md).
#pragma once

#include <boost/math/policies/policy.hpp>
#include <boost/math/special_functions/gamma.hpp>
#include <boost/math/special_functions/zeta.hpp>
#include <boost/math/distributions/hypergeometric.hpp>
#include <boost/math/distributions/non_central_t.hpp>
#include <boost/math/distributions/normal.hpp>
#include <boost/math/distributions/students_t.hpp>

namespace alphaledger::detail {

using MathPolicy = boost::math::policies::policy<
    boost::math::policies::domain_error<boost::math::policies::ignore_error>,
    boost::math::policies::pole_error<boost::math::policies::ignore_error>,
    boost::math::policies::overflow_error<boost::math::policies::ignore_error>,
    boost::math::policies::underflow_error<boost::math::policies::ignore_error>,
    boost::math::policies::denorm_error<boost::math::policies::ignore_error>,
    boost::math::policies::evaluation_error<boost::math::policies::ignore_error>,
    boost::math::policies::rounding_error<boost::math::policies::ignore_error>,
    boost::math::policies::indeterminate_result_error<boost::math::policies::ignore_error>,
    boost::math::policies::promote_double<false>>;

inline double zeta(double s) { return boost::math::zeta(s, MathPolicy()); }
inline double tgamma(double s) { return boost::math::tgamma(s, MathPolicy()); }

// Distributions for the experiment statistics (src/core/stats*.cpp). Upper tails are Boost
// complements, accurate far into the tail (no 1 - cdf cancellation).
using Normal = boost::math::normal_distribution<double, MathPolicy>;
using StudentsT = boost::math::students_t_distribution<double, MathPolicy>;
using NoncentralT = boost::math::non_central_t_distribution<double, MathPolicy>;
using Hypergeometric = boost::math::hypergeometric_distribution<double, MathPolicy>;

// P(Z > z), Z standard normal.
inline double normal_upper(double z) { return boost::math::cdf(boost::math::complement(Normal(), z)); }
// x with P(Z <= x) = p.  REQUIRES: 0 < p < 1.
inline double normal_quantile(double p) { return boost::math::quantile(Normal(), p); }
// x with P(Z > x) = q, computed from q directly (accurate for tiny q).  REQUIRES: 0 < q < 1.
inline double normal_upper_quantile(double q) { return boost::math::quantile(boost::math::complement(Normal(), q)); }
// P(T > t), T Student's t with df degrees of freedom.  REQUIRES: df > 0.
inline double t_upper(double t, double df) { return boost::math::cdf(boost::math::complement(StudentsT(df), t)); }
// x with P(T > x) = q.  REQUIRES: df > 0, 0 < q < 1.
inline double t_upper_quantile(double q, double df) { return boost::math::quantile(boost::math::complement(StudentsT(df), q)); }
// P(T' > x), T' noncentral t with df degrees of freedom and noncentrality ncp.  REQUIRES: df > 0.
inline double noncentral_t_upper(double x, double df, double ncp) {
  return boost::math::cdf(boost::math::complement(NoncentralT(df, ncp), x));
}

}  // namespace alphaledger::detail
