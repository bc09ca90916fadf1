#include "tools/junco/cli_options.hpp"

#include "tools/junco/command.hpp"

#include "protocol/framing.hpp"  // default_socket_path(), shared with the daemon
#include "units/si_text.hpp"

#include <cstdio>
#include <memory>
#include <algorithm>
#include <set>

namespace junco::cli {

namespace {

std::string with_default(const std::string& help, const std::string& shown_default) {
  return shown_default.empty() ? help : help + " (default " + shown_default + ")";
}

std::string type_name(const std::string& unit) { return unit.empty() ? "NUMBER" : unit; }

// CLI11 calls this with the option's text; a bad value becomes a one-line
// "--name: 'text' ..." error from the units grammar.
double parse_for(const CLI::Option* opt, const std::string& text, const std::string& unit) {
  std::string why;
  const auto v = units::parse_si(text, unit, &why);
  if (!v) throw CLI::ValidationError(opt->get_name(), why);
  return *v;
}

}  // namespace

CLI::Option* add_si_option(CLI::App& app, const std::string& names, double& target, const std::string& unit,
                           const std::string& help, const std::string& shown_default) {
  // The option (owned by app) is only known after add_option_function
  // returns; the callback reaches it through this shared slot for its name.
  auto holder = std::make_shared<CLI::Option*>(nullptr);
  *holder = app.add_option_function<std::string>(
      names, [&target, unit, holder](const std::string& text) { target = parse_for(*holder, text, unit); },
      with_default(help, shown_default));
  return (*holder)->type_name(type_name(unit));
}

CLI::Option* add_si_option(CLI::App& app, const std::string& names, std::optional<double>& target, const std::string& unit,
                           const std::string& help) {
  auto holder = std::make_shared<CLI::Option*>(nullptr);
  *holder = app.add_option_function<std::string>(
      names, [&target, unit, holder](const std::string& text) { target = parse_for(*holder, text, unit); }, help);
  return (*holder)->type_name(type_name(unit));
}

CLI::Option* add_si_list_option(CLI::App& app, const std::string& names, std::vector<double>& target, const std::string& unit,
                                const std::string& help, const std::string& shown_default) {
  auto holder = std::make_shared<CLI::Option*>(nullptr);
  *holder = app.add_option_function<std::string>(
      names,
      [&target, unit, holder](const std::string& text) {
        try {
          target = units::parse_si_list(text, unit);
        } catch (const std::invalid_argument& e) {
          throw CLI::ValidationError((*holder)->get_name(), e.what());
        }
      },
      with_default(help, shown_default));
  return (*holder)->type_name(unit.empty() ? "LIST" : unit + ",...");
}

CLI::Validator positive_id() {
  return CLI::Validator(
      [](std::string& text) -> std::string {
        const bool digits = !text.empty() && text.size() < 16 && text.find_first_not_of("0123456789") == std::string::npos;
        if (digits && std::stoll(text) > 0) return {};
        return "must be a positive integer id, not '" + text + "'";
      },
      "");
}

CLI::Option* add_socket_option(CLI::App& app, std::string& target) {
  return app.add_option("--socket", target, "juncod's socket (default: $JUNCO_SOCKET, else the daemon's; see junco status --help)")
      ->type_name("PATH");
}

std::string socket_path(const std::string& option_value) {
  return option_value.empty() ? daemon::rpc::default_socket_path() : option_value;
}

bool apply_renames(const std::string& command, std::vector<std::string>& args,
                   const std::vector<std::pair<std::string, std::string>>& renamed) {
  const auto spells = [](const std::string& arg, const std::string& name) { return arg == name || arg.rfind(name + "=", 0) == 0; };
  const auto options_end = std::find(args.begin(), args.end(), "--");
  for (const auto& [old_name, new_name] : renamed) {
    const auto has = [&](const std::string& name) {
      return std::any_of(args.begin(), options_end, [&](const std::string& a) { return spells(a, name); });
    };
    if (has(old_name) && has(new_name)) {
      std::fprintf(stderr, "junco %s: give %s only (%s is its old spelling)\n", command.c_str(), new_name.c_str(), old_name.c_str());
      return false;
    }
  }
  std::set<std::string> warned;
  for (auto& a : args) {
    if (a == "--") break;  // what follows is not an option
    for (const auto& [old_name, new_name] : renamed) {
      const bool bare = a == old_name, joined = a.rfind(old_name + "=", 0) == 0;
      if (!bare && !joined) continue;
      if (warned.insert(old_name).second)
        std::fprintf(stderr, "junco %s: warning: %s is now spelled %s (the old spelling still works for now)\n", command.c_str(),
                     old_name.c_str(), new_name.c_str());
      a = new_name + a.substr(old_name.size());
      break;
    }
  }
  return true;
}

std::optional<int> parse_command_line(CLI::App& app, const std::string& command, std::vector<std::string> args) {
  std::vector<std::string> reversed(args.rbegin(), args.rend());  // CLI11 takes them last first
  try {
    app.parse(reversed);
  } catch (const CLI::CallForHelp&) {
    std::printf("%s", app.help().c_str());
    return exit_ok;
  } catch (const CLI::ExtrasError& e) {  // CLI11: "The following argument(s) was/were not expected: X Y"
    const std::string what = e.what();
    const std::string listed = what.substr(what.find(": ") == std::string::npos ? 0 : what.find(": ") + 2);
    // CLI11 lists them in the order it was given them: ours, last first.
    std::vector<std::string> words;
    for (std::size_t start = 0; start <= listed.size();) {
      const std::size_t end = std::min(listed.find(' ', start), listed.size());
      words.push_back(listed.substr(start, end - start));
      start = end + 1;
    }
    std::string extras;
    for (auto w = words.rbegin(); w != words.rend(); ++w) extras += (extras.empty() ? "" : " ") + *w;
    std::fprintf(stderr, "junco %s: unknown option or extra argument '%s' (see junco %s --help)\n", command.c_str(), extras.c_str(),
                 command.c_str());
    return exit_usage;
  } catch (const CLI::ParseError& e) {
    std::fprintf(stderr, "junco %s: %s (see junco %s --help)\n", command.c_str(), e.what(), command.c_str());
    return exit_usage;
  }
  return std::nullopt;
}

}  // namespace junco::cli
