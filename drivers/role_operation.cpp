// Range checks and templated sends shared by the Source, Receiver and Switch drivers.
#include "drivers/role_operation.hpp"

#include <cmath>

#include <fmt/format.h>

namespace echoline::drivers {

Status check_operation_range(const ScpiSession& session, const Profile& profile, std::string_view operation,
                             double value, double min, double max, std::string_view unit) {
  if (std::isfinite(value) && value >= min && value <= max) return Status::success();
  return make_error(ErrorKind::invalid_argument,
                    fmt::format("{}: {}: {} {} is outside the range of profile {} ({} to {} {}); nothing sent",
                                session.name(), operation, value, unit, profile.name, min, max, unit));
}

Error absent_operation(const ScpiSession& session, const Profile& profile, std::string_view operation) {
  return make_error(ErrorKind::config, fmt::format("{}: {}: profile {} declares this operation absent (the instrument "
                                                   "has none); nothing sent", session.name(), operation, profile.name));
}

Result<std::string> expand_operation(const ScpiSession& session, const Profile& profile, std::string_view operation,
                                     std::initializer_list<TemplateArg> args) {
  if (profile.declares_absent(operation)) return absent_operation(session, profile, operation);
  if (!profile.has(operation)) {
    return make_error(ErrorKind::config,
                      fmt::format("{}: profile {} has no operation {}", session.name(), profile.name, operation));
  }
  auto command = profile.command(operation).expand(args);
  if (!command.ok()) return command.error().with_context(session.name());
  return command;
}

Status send_operation(ScpiSession& session, const Profile& profile, std::string_view operation,
                      std::initializer_list<TemplateArg> args, bool check) {
  auto command = expand_operation(session, profile, operation, args);
  if (!command.ok()) return command.error();
  Status s = session.write(command.value());
  if (!s.ok()) return s;
  if (check && profile.check_errors == "each-step") return session.drain_errors();
  return Status::success();
}

}  // namespace echoline::drivers
