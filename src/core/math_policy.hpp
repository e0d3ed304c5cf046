// The one Boost.Math error policy of the library: errors become values we check (NaN or +-inf
// returned, errno untouched), never exceptions, so the core stays exception-free. Callers
// validate inputs before calling (STYLE.md 8).
#pragma once

#include <boost/math/policies/policy.hpp>
#include <boost/math/special_functions/gamma.hpp>
#include <boost/math/special_functions/zeta.hpp>

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

}  // namespace alphaledger::detail
