// Switch role driver: position lookup, template expansion, settle via *OPC?.
#include "drivers/switch.hpp"

#include <fmt/format.h>

namespace echoline::drivers {

Switch::Switch(ScpiSession& session, const Profile& profile) : session_(session), profile_(profile) {}

Status Switch::initialize() {
  if (profile_.reset_on_initialize) {
    if (Status s = session_.reset(); !s.ok()) return s;
  }
  if (Status s = session_.clear(); !s.ok()) return s;
  for (const auto& line : profile_.init)
    if (Status s = session_.write(line); !s.ok()) return s;
  if (Status s = session_.wait_complete(); !s.ok()) return s;
  return check_errors();
}

Status Switch::select(std::string_view position) {
  auto it = profile_.positions.find(std::string(position));
  if (it == profile_.positions.end()) {
    std::string allowed;
    for (const auto& [name, token] : profile_.positions) allowed += (allowed.empty() ? "" : ", ") + name;
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("{}: select: position \"{}\" is not in profile {} (allowed: {}); nothing sent",
                                  session_.name(), position, profile_.name, allowed));
  }
  auto command = profile_.command("select").expand({{"position", it->second}});
  if (!command.ok()) return command.error().with_context(session_.name());
  if (Status s = session_.write(command.value()); !s.ok()) return s;
  if (Status s = session_.wait_complete(); !s.ok()) return s;   // relay settled
  if (profile_.check_errors == "each-step") return session_.drain_errors();
  return Status::success();
}

Status Switch::check_errors() {
  if (profile_.check_errors == "never") return Status::success();
  return session_.drain_errors();
}

}  // namespace echoline::drivers
