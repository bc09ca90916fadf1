// Command lines of juncod and junco-sim with CLI11 (Debian libcli11-dev,
// header-only): the options are defined once and --help is generated from
// those definitions. This file holds what the programs share: --help and
// --version set up alike, and one way to report a bad command line (one
// line on stderr naming the program, exit status 2).
#pragma once

#include "junco/exit_status.hpp"
#include "junco/version.hpp"

#include <CLI/CLI.hpp>

#include <cstdio>
#include <optional>
#include <stdexcept>
#include <string>

namespace junco::cli_args {

// An App whose --version prints "PROGRAM VERSION" (the build's version)
// and whose help lists options with their defaults.
inline void setup(CLI::App& app, const std::string& program) {
  app.name(program);
  app.set_help_flag("-h,--help", "print this help and exit");
  app.set_version_flag("--version", program + " " + junco::version, "print the version and exit");
  app.option_defaults()->always_capture_default();
  app.get_formatter()->column_width(30);
  app.get_formatter()->label("REQUIRED", "(required)");
}

// The left column of --help for an option that takes a value: "METAVAR
// [default]" (from the option's own default), without CLI11's notes on
// types and validators. Returns `o` for chaining.
inline CLI::Option* shown_as(CLI::Option* o, const std::string& metavar) {
  std::string text = metavar;
  const std::string d = o->get_default_str();
  if (!d.empty() && d != "[]" && d != "-1") text += " [" + d + "]";
  if (o->get_required()) text += " (required)";
  return o->type_name(metavar)->option_text(text);
}

// Checks with messages a person reads ("--slots: wants a whole number
// 1..256, not '0'"), in place of CLI11's generic range text.
inline CLI::Validator whole_number(long long min, long long max) {
  return CLI::Validator(
      [min, max](std::string& v) -> std::string {
        std::size_t pos = 0;
        long long x = 0;
        try {
          x = std::stoll(v, &pos);
        } catch (const std::exception&) {
          pos = 0;
        }
        if (v.empty() || pos != v.size() || x < min || x > max)
          return "wants a whole number " + std::to_string(min) + ".." + std::to_string(max) + ", not '" + v + "'";
        return std::string();
      },
      "");
}
inline CLI::Validator non_negative_number() {
  return CLI::Validator(
      [](std::string& v) -> std::string {
        std::size_t pos = 0;
        double x = -1;
        try {
          x = std::stod(v, &pos);
        } catch (const std::exception&) {
          pos = 0;
        }
        if (v.empty() || pos != v.size() || !(x >= 0) || x > 1e300) return "wants a number >= 0, not '" + v + "'";
        return std::string();
      },
      "");
}

// Parses; nullopt to go on, or the status to exit with: 0 after --help or
// --version (printed on stdout), exit_usage after one line on stderr.
inline std::optional<int> parse(CLI::App& app, int argc, const char* const* argv) {
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp&) {
    std::fputs(app.help().c_str(), stdout);
    return exit_ok;
  } catch (const CLI::CallForAllHelp&) {
    std::fputs(app.help("", CLI::AppFormatMode::All).c_str(), stdout);
    return exit_ok;
  } catch (const CLI::CallForVersion& e) {
    std::printf("%s\n", e.what());
    return exit_ok;
  } catch (const CLI::ParseError& e) {
    std::fprintf(stderr, "%s: %s (see %s --help)\n", app.get_name().c_str(), e.what(), app.get_name().c_str());
    return exit_usage;
  }
  return std::nullopt;
}

}  // namespace junco::cli_args
