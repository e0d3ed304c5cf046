// Internal to recover (src/store/recover*.cpp): recover.cpp holds recover_ledger's steps (the
// strict open, the scratch copy, the new ledger, its verify), recover_stream.cpp the copy of one
// stream up to its first step that cannot be proven.
#pragma once

#include <string>

#include "alphaledger/recover.hpp"
#include "alphaledger/result.hpp"
#include "alphaledger/store.hpp"

namespace alphaledger::recover_detail {

// Writes `batch` to `store` when it has grown, or always with `force`, and empties it.
Status flush(Store& store, WriteBatch& batch, bool force);

// Copies the stream `name` (its configuration's bytes `config_bytes`) from `from` to `to`, up to
// its first unproven step, with a new head; what was kept and why it stopped go into `out`.
// Errors: only a failed write to `to` (what cannot be read or proven in `from` is in `out`).
Status copy_stream(Store& from, Store& to, const std::string& name, const std::string& config_bytes,
                   StreamRecovery& out);

}  // namespace alphaledger::recover_detail
