// The arithmetic of a look at a running test, shared by Ledger::look and verify (ledger_look.cpp).
// Internal to the store.
#pragma once

#include "alphaledger/anytime.hpp"
#include "alphaledger/ledger.hpp"
#include "store/codec.hpp"

namespace alphaledger::store {

// The estimate and its variance from a look's summaries (effect_of_proportions / effect_of_means).
Result<EffectEstimate> look_effect(const LookData& data);

// The look after `previous` (null for the first): the always-valid evidence with the stream's alpha
// and direction, the running minimum, and the verdict against `level` (p-value rules: running
// minimum <= level; e-lond: e-value >= 1 / level). previous_look is left 0 for the caller.
// REQUIRES: data.mixture_sd is set. Errors: what anytime_evidence refuses.
Result<LookPayload> compute_look(const RuleConfig& config, Alternative alternative, double level,
                                 const LookData& data, const LookPayload* previous);

}  // namespace alphaledger::store
