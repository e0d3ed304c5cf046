// Placeholder: registers nothing until this part is built.
#include "cli/command.hpp"

namespace alphaledger::cli {

void add_service_commands(CLI::App& /*app*/, CommandContext& /*ctx*/) {}

}  // namespace alphaledger::cli
