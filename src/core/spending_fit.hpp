// The fitting steps behind the spending sequences' fast mode (src/core/spending.cpp), declared
// here so the core tests can check them directly. Project-internal; not installed.
#pragma once

#include <cstddef>
#include <vector>

#include "alphaledger/spending.hpp"

namespace alphaledger {

// The largest mass a fitted mixture may have: strictly below 1, so the mixture stays a valid
// spending sequence after rounding (docs/methods.md 15.6).
inline constexpr double kMixtureMass = 1.0 - 1e-9;

// Fits a power-law mixture: trapezoid rule in u = ln x, step h, range
// [u_lo, u_hi]; weights renormalised so the mass is exactly `mass`.
GeometricMixture fit_power_mixture(double s, bool shifted, double h, double u_lo, double u_hi, double mass);

// Fits the hybrid mixture of a jm sequence: its first 16 lags exact, the tail a nonnegative
// least-squares fit on log-spaced timescales, scaled to stay nonincreasing and below mass 1.
GeometricMixture fit_hybrid_mixture(const SpendingSequence& seq);

// The mixture fit_hybrid_mixture() gives for the default "jm" (C = kJmConstant), from stored
// values: what SpendingSequence::mixture() uses for that sequence.
GeometricMixture stored_jm_mixture();

// Nonnegative least squares min ||A w - b||, w >= 0 (Lawson–Hanson active set, Householder QR on
// the passive columns). A is row-major rows x cols. Deterministic.
std::vector<double> nonnegative_least_squares(const std::vector<double>& a, std::size_t rows,
                                              std::size_t cols, const std::vector<double>& b);

}  // namespace alphaledger
