// `skerry validate GENOME` and `skerry validations RUN`: held-out validation
// scores, computed by the fleet (proto/skerry/v1/validation.proto).
//
// `validate` asks for a genome's validation (stored once per genome; asking
// again returns the stored one) and, unless --no-wait, polls until the fleet
// has computed it or --timeout passes. It prints the validation score beside
// the training score.
#ifndef SKERRY_CLI_VALIDATE_H_
#define SKERRY_CLI_VALIDATE_H_

#include <string>
#include <vector>

#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "cli/args.h"
#include "cli/commands.h"
#include "skerry/v1/validation.grpc.pb.h"

namespace skerry::cli {

// How long `validate` waits by default, and how often it asks.
inline constexpr int kDefaultValidateTimeoutSeconds = 300;
inline constexpr absl::Duration kValidatePollInterval = absl::Milliseconds(500);

std::vector<CommandSpec> ValidationCommandSpecs();

// `validate` and `validations`, parsed; each returns the exit code.
int ValidateGenomeCommand(const ParsedArgs& args,
                          skerry::v1::ValidationService::StubInterface& stub,
                          Io& io);
int ValidationsCommand(const ParsedArgs& args,
                       skerry::v1::ValidationService::StubInterface& stub,
                       Io& io);

// One validation in words, several lines (`validate`).
std::string FormatValidation(const skerry::v1::Validation& v,
                             absl::TimeZone zone);
// `validations`: one row per validation.
std::string FormatValidationList(
    const std::vector<skerry::v1::Validation>& list);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_VALIDATE_H_
