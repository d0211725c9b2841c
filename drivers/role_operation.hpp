// What every role driver does with its profile: refuse a value outside the profile's range
// before anything is sent, and send one templated operation with the profile's error policy.
// Stateless; the caller's session is used by one thread at a time.
#pragma once

#include <initializer_list>
#include <string_view>

#include "drivers/command_template.hpp"
#include "drivers/profile.hpp"
#include "drivers/result.hpp"
#include "drivers/scpi_session.hpp"

namespace echoline::drivers {

// invalid_argument naming instrument, operation, value and range when value is outside [min, max]
// (or not finite); nothing is sent.
Status check_operation_range(const ScpiSession& session, const Profile& profile, std::string_view operation,
                             double value, double min, double max, std::string_view unit);

// config error "<instrument>: <operation>: profile <name> declares this operation absent ...".
Error absent_operation(const ScpiSession& session, const Profile& profile, std::string_view operation);

// The command text of `operation` expanded with `args`; config error when the profile lacks it.
Result<std::string> expand_operation(const ScpiSession& session, const Profile& profile, std::string_view operation,
                                     std::initializer_list<TemplateArg> args);

// Expands `operation` from the profile and writes it; drains the error queue afterwards when
// `check` and the profile's policy is "each-step". config error when the profile lacks it.
Status send_operation(ScpiSession& session, const Profile& profile, std::string_view operation,
                      std::initializer_list<TemplateArg> args, bool check);

}  // namespace echoline::drivers
