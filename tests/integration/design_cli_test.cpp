// The junco CLI's design, export and plot commands as real processes on real
// files: a model document and readings CSV written here, gnuplot really run.
#include "design/calculators.hpp"
#include "formats/readings_csv.hpp"
#include "formats/model_document.hpp"

#include "tests/support/cli_run.hpp"

#include <nlohmann/json.hpp>

#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>
#include <sys/wait.h>
#include <unistd.h>

using namespace junco::fitting;

namespace {

using junco::test::run_junco;
using junco::test::slurp;
using Dir = junco::test::ScratchDir;

PartModel demo_part(const std::string& label, double is_a) {
  PartModel p;
  p.part_label = label;
  p.lot = "LOT-DEMO7";
  p.run_id = "run-3";
  p.params = {is_a, 1.0, 1.0};
  p.is_se_a = 1e-16;
  p.n_se = 1e-3;
  p.rs_se_ohm = 0.01;
  return p;
}

}  // namespace

TEST_CASE("junco design bias-r from a model document reproduces E8") {
  // Source: docs/references.md E8 (427.533 ohm for 10 mA from 5 V).
  Dir d;
  std::ofstream(d.file("m.json")) << model_document_json(demo_part("DM-01", 1e-14));
  const auto r = run_junco("design bias-r --model " + d.file("m.json") + " --supply 5V --current 10mA");
  INFO(r.out);
  CHECK(r.status == 0);
  CHECK(r.out.find("427.533 ohm") != std::string::npos);
  CHECK(r.out.find("assumed   supply") != std::string::npos);
}

TEST_CASE("junco design rejects bad input with exit 2 and one clear line") {
  auto r = run_junco("design loss --is 1e-14 --n 1 --rs 1 --current 10xA");
  CHECK(r.status == 2);
  CHECK(r.out.find("--current") != std::string::npos);
  r = run_junco("design nosuch");
  CHECK(r.status == 2);
  r = run_junco("design isolation --is 1e-14 --n 1 --rs 1");
  CHECK(r.status == 2);
  CHECK(r.out.find("junction capacitance") != std::string::npos);
}

TEST_CASE("junco design: every row of the calculator table is a subcommand with its options and help texts") {
  // The options are generated from design/calculators.hpp: a row added
  // there must show up here with no change to tools/junco/cmd_design.cpp.
  const auto top = run_junco("design --help");
  REQUIRE(top.status == 0);
  for (const auto& c : design_calculators()) {
    INFO(c.name);
    CHECK(top.out.find("  " + c.name + " ") != std::string::npos);
    CHECK(top.out.find(c.synopsis.substr(0, 40)) != std::string::npos);
    const auto help = run_junco("design " + c.name + " --help");
    INFO(help.out);
    CHECK(help.status == 0);
    std::vector<const DesignInputSpec*> specs;
    for (const auto& s : c.inputs) specs.push_back(&s);
    if (c.needs_part || c.takes_part)
      for (const auto& s : design_part_inputs())
        if (s.key != "temp_k") specs.push_back(&s);  // on the command line in degC: --temp-c
    for (const auto* s : specs) {
      CHECK(help.out.find("--" + s->option + " ") != std::string::npos);
      CHECK(help.out.find(s->label) != std::string::npos);
      if (!s->fallback && !s->optional && s->choices.empty()) CHECK(help.out.find(s->label + " (required)") != std::string::npos);
    }
    for (const char* o : {"--json", "--socket"}) CHECK(help.out.find(o) != std::string::npos);
    CHECK((help.out.find("--temp-c DEGC") != std::string::npos) == (c.needs_part || c.takes_part));
    CHECK((help.out.find("--model FILE ") != std::string::npos) == (c.needs_part || c.takes_part));
  }
  // A part option on a calculator that needs no part is refused on the command line.
  const auto attenuator = run_junco("design attenuator --target 10 --r0 1 --k 1 --x 1 --is 1n");
  CHECK(attenuator.status == 2);
  CHECK(attenuator.out.find("--is") != std::string::npos);
}

TEST_CASE("junco design headroom: the DC rule alone, the charge rule with --freq and --tt, a part optional") {
  // DC rule (common practice, no source): 1 V load peak into 50 ohm, choke return: I^ = 20 mA.
  const auto dc = run_junco("design headroom --amplitude 1 --json");
  REQUIRE(dc.status == 0);
  const auto a = nlohmann::json::parse(dc.out);
  REQUIRE(a["result"].size() == 2);
  CHECK(a["result"][1]["value"].get<double>() == Approx(0.02).epsilon(1e-12));
  // Charge-control rule (docs/references.md [CC]): TT 5 ns at 100 MHz, w*TT = pi:
  // 20 mA/sqrt(1 + pi^2) = 6.0631 mA (hand arithmetic: sqrt(10.8696) = 3.29691).
  const auto tt = run_junco("design headroom --amplitude 1 --freq 100MHz --tt 5ns --json");
  REQUIRE(tt.status == 0);
  const auto b = nlohmann::json::parse(tt.out);
  CHECK(b["result"][1]["key"] == "min_bias_a");
  CHECK(b["result"][1]["value"].get<double>() == Approx(0.02 / 3.29691).epsilon(1e-5));
  // With a part (explicit parameters): its TT override, the same rule (no Cj given: share 1).
  const auto part = run_junco("design headroom --amplitude 1 --freq 100MHz --is 1e-14 --n 1 --rs 1 --tt 5ns --json");
  REQUIRE(part.status == 0);
  CHECK(nlohmann::json::parse(part.out)["result"][1]["value"].get<double>() == Approx(0.02 / 3.29691).epsilon(1e-5));
  // A part input that needs the part itself, without one, is refused naming the option.
  const auto cj = run_junco("design headroom --amplitude 1 --cj 1p");
  CHECK(cj.status == 2);
  CHECK(cj.out.find("--cj: needs a part") != std::string::npos);
}

TEST_CASE("junco design power fails over a limit") {
  const auto r = run_junco("design power --is 1e-14 --n 1 --rs 1 --supply 5 --bias-resistor 100 --max-resistor 125mW");
  CHECK(r.status == 1);
  CHECK(r.out.find("OVER THE LIMIT") != std::string::npos);
}

TEST_CASE("junco export spice and lot stats from model documents") {
  Dir d;
  std::ofstream(d.file("a.json")) << model_document_json(demo_part("DM-01", 1e-14));
  std::ofstream(d.file("b.json")) << model_document_json(demo_part("DM-02", 1.02e-14));
  std::ofstream(d.file("c.json")) << model_document_json(demo_part("DM-03", 5e-13));
  auto r = run_junco("export spice " + d.file("a.json"));
  CHECK(r.status == 0);
  CHECK(r.out.find(".model DM_01 D(IS=1.000000e-14 N=1.000000e+00 RS=1.000000e+00 EG=1.11 XTI=3 TNOM=27)") != std::string::npos);
  CHECK(r.out.find("* run run-3") != std::string::npos);
  r = run_junco("export spice " + d.file("a.json") + " " + d.file("b.json") + " " + d.file("c.json"));
  CHECK(r.out.find(".model LOT_DEMO7_NOM D(IS=1.020000e-14") != std::string::npos);  // median
  r = run_junco("export stats " + d.file("a.json") + " " + d.file("b.json") + " " + d.file("c.json"));
  INFO(r.out);
  CHECK(r.status == 0);
  CHECK(r.out.find("DM-02 DM-01") != std::string::npos);  // matched pair, sorted by Vf
}

TEST_CASE("junco plot renders SVGs with labelled axes, and a PNG") {
  Dir d;
  const auto part = demo_part("DM-01", 1e-14);
  std::ofstream(d.file("m.json")) << model_document_json(part);
  std::vector<IvPoint> iv;
  std::vector<AcPoint> ac;
  for (int k = 0; k < 30; ++k) {
    const double i = 1e-6 * std::pow(10.0, k / 6.0);
    iv.push_back({diode_voltage_v(part.params, i, 300.15) + 1e-4 * ((k % 3) - 1), i});
    const double rd = 1.0 + 0.025865 / i;
    ac.push_back({i, 1e6, 1.0, 50.0 / (50.0 + rd)});
  }
  std::ofstream(d.file("iv.csv")) << iv_readings_csv(iv);
  std::ofstream(d.file("ac.csv")) << ac_readings_csv(ac);
  std::ofstream(d.file("m2.json")) << model_document_json(demo_part("DM-02", 2e-14));
  struct Case {
    std::string args, file;
    std::vector<std::string> labels;
  };
  const std::vector<Case> cases{
      {"plot iv --readings " + d.file("iv.csv") + " --model " + d.file("m.json") + " --out " + d.file("iv.svg"),
       d.file("iv.svg"), {"forward voltage V (V)", "forward current I (A)", "(mV)"}},
      {"plot ac --readings " + d.file("ac.csv") + " --model " + d.file("m.json") + " --out " + d.file("ac.svg"),
       d.file("ac.svg"), {"bias current I (A)", "(dB)"}},
      {"plot lot " + d.file("m.json") + " " + d.file("m2.json") + " --out " + d.file("lot.svg"), d.file("lot.svg"),
       {"IS (A)", "N (1)", "DM-01", "DM-02"}},
  };
  for (const auto& c : cases) {
    const auto r = run_junco(c.args);
    INFO(c.args << "\n" << r.out);
    REQUIRE(r.status == 0);
    const std::string svg = slurp(c.file);
    CHECK(svg.find("<svg") != std::string::npos);
    CHECK(svg.find("</svg>") != std::string::npos);
    for (const auto& l : c.labels) CHECK(svg.find(l) != std::string::npos);
  }
  const auto r = run_junco("plot iv --readings " + d.file("iv.csv") + " --model " + d.file("m.json") + " --out " +
                       d.file("iv.png"));
  REQUIRE(r.status == 0);
  const std::string png = slurp(d.file("iv.png"));
  REQUIRE(png.size() > 8);
  CHECK(png.substr(1, 3) == "PNG");
  CHECK(run_junco("plot iv --readings " + d.file("missing.csv") + " --model " + d.file("m.json") + " --out x.svg").status == 2);
}

TEST_CASE("junco fit --ac: joint AC+DC fit offline, agreeing and disagreeing") {
  // Readings generated from the Shockley equation with series resistance
  // (docs/references.md §2) and the fixture divider 50/(50 + Rs + n·Vt/I)
  // (docs/references.md §6, small-signal rd); "another Rs" feeds the AC readings
  // a different Rs than the DC curve, as a hot DC sweep would.
  Dir d;
  const DiodeParams truth{2e-9, 1.8, 0.7};
  const double vt = 0.025864;  // kT/q at 300.15 K (docs/references.md §1)
  std::vector<IvPoint> iv;
  std::vector<AcPoint> ac_same, ac_other;
  for (int k = 0; k < 30; ++k) {
    const double i = 1e-5 * std::pow(10.0, k / 8.0);
    iv.push_back({diode_voltage_v(truth, i, 300.15) + 5e-5 * ((k % 3) - 1), i});
    const double wiggle = 1.0 + 1e-4 * ((k % 2) ? 1 : -1);
    ac_same.push_back({i, 1e6, 1e-3, 1e-3 * wiggle * 50.0 / (50.0 + 0.7 + 1.8 * vt / i)});
    ac_other.push_back({i, 1e6, 1e-3, 1e-3 * wiggle * 50.0 / (50.0 + 2.0 + 1.8 * vt / i)});
  }
  std::ofstream(d.file("iv.csv")) << iv_readings_csv(iv);
  std::ofstream(d.file("same.csv")) << ac_readings_csv(ac_same);
  std::ofstream(d.file("other.csv")) << ac_readings_csv(ac_other);
  auto r = run_junco("fit " + d.file("iv.csv") + " --ac " + d.file("same.csv"));
  INFO(r.out);
  CHECK(r.status == 0);
  CHECK(r.out.find("verdict: AC and DC agree") != std::string::npos);
  r = run_junco("fit " + d.file("iv.csv") + " --ac " + d.file("other.csv"));
  INFO(r.out);
  CHECK(r.status == 0);  // a disagreement is a finding, not a failure
  CHECK(r.out.find("verdict: AC and DC DISAGREE") != std::string::npos);
  CHECK(r.out.find("self-heating") != std::string::npos);
  r = run_junco("fit " + d.file("iv.csv") + " --ac " + d.file("same.csv") + " --json");
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["joint"]["agree"] == true);
  CHECK(j["joint"]["joint"]["rs_ohm"]["value"].get<double>() == Approx(0.7).margin(0.02));
  CHECK(j["joint"]["ac_used"].get<long>() > 20);
  CHECK(run_junco("fit " + d.file("iv.csv") + " --ac " + d.file("iv.csv")).status == 2);
  CHECK(run_junco("fit " + d.file("iv.csv") + " --ac " + d.file("same.csv") + " --ac-unit dBm").status == 2);
}

TEST_CASE("junco design off-headroom fails with the fix, and the switch-network calculators answer") {
  // Source: docs/references.md §6: 100 mW in 50 ohm is 3.16 V at the load, so
  // the off series diode sees the 6.32 V EMF: 5 V of reverse bias is short.
  const std::string part = "--is 2.5n --n 1.85 --rs 0.7 --cj 2p --vj 0.65 --m 0.4";
  auto r = run_junco("design off-headroom " + part + " --reverse 5 --power 100mW --bv 30");
  INFO(r.out);
  CHECK(r.status == 1);
  CHECK(r.out.find("FAIL") != std::string::npos);
  CHECK(r.out.find("raise the reverse bias to 6.824 V") != std::string::npos);
  r = run_junco("design off-headroom " + part + " --reverse 10 --power 100mW --bv 30");
  CHECK(r.status == 0);
  CHECK(r.out.find("pass") != std::string::npos);
  // Matched 10 dB T pad, 50 ohm: 25.97 and 35.14 ohm (textbook pad table, from memory).
  r = run_junco("design attenuator --pad tee --target 10dB --r0 1 --k 0.04 --x 0.9");
  CHECK(r.status == 0);
  CHECK(r.out.find("25.9747 ohm") != std::string::npos);
  CHECK(r.out.find("35.1364 ohm") != std::string::npos);
  r = run_junco("design bias-network " + part + " --supply 5 --bias-resistor 390 --rground 1k --feed-diode same --json");
  CHECK(r.status == 0);
  CHECK(r.out.find("\"supply_leak_db\"") != std::string::npos);
  r = run_junco("design junction-temp " + part + " --current 10mA --theta 400 --temp-c 50");
  CHECK(r.status == 2);
  CHECK(r.out.find("--ambient") != std::string::npos);
}
