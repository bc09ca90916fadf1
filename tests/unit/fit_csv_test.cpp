// parse_iv_csv: accepted headers and units, column choice, and the exact
// one-line error for each kind of bad file.
#include "formats/iv_csv.hpp"

#include <catch2/catch.hpp>

using junco::fitting::IvCsvOptions;
using junco::fitting::parse_iv_csv;

TEST_CASE("header names and aliases, any case, units honoured", "[csv]") {
  struct Case {
    const char* text;
    double v, i;
  };
  const Case cases[] = {
      {"v,i\n0.6,1e-3\n", 0.6, 1e-3},
      {"V_V,I_A\n0.6,1e-3\n", 0.6, 1e-3},
      {"Voltage,Current\n0.6,1e-3\n", 0.6, 1e-3},
      {"voltage [V],current [A]\n0.6,1e-3\n", 0.6, 1e-3},
      {"v [mV],i (mA)\n600,1\n", 0.6, 1e-3},
      {"v (uV) , i [uA]\n600000,1000\n", 0.6, 1e-3},
      {"v,i [\xC2\xB5" "A]\n0.6,1000\n", 0.6, 1e-3},
      {"\"v\";\"i_a\"\n0.6;1e-3\n", 0.6, 1e-3},
      {"t_s\tv\ti\n0\t0.6\t+1e-3\n", 0.6, 1e-3},
      {"\xEF\xBB\xBF# comment first\n\nv,i\r\n# between\n0.6,1e-3\r\n", 0.6, 1e-3},
      {"i_a,temp_c,v_v\n1e-3,27,0.6", 0.6, 1e-3},  // any order, no final newline
  };
  for (const auto& c : cases) {
    INFO(c.text);
    const auto r = parse_iv_csv(c.text);
    REQUIRE(r.ok());
    REQUIRE(r.points.size() == 1);
    CHECK(r.points[0].v == Approx(c.v).epsilon(1e-12));
    CHECK(r.points[0].i_a == Approx(c.i).epsilon(1e-12));
  }
}

TEST_CASE("line numbers follow the file, comments included", "[csv]") {
  const auto r = parse_iv_csv("# a\nv,i\n0.5,1e-4\n# b\n\n0.6,1e-3\n");
  REQUIRE(r.ok());
  REQUIRE(r.line_of_point.size() == 2);
  CHECK(r.line_of_point[0] == 3);
  CHECK(r.line_of_point[1] == 6);
  CHECK(r.v_header == "v");
  CHECK(r.i_header == "i");
}

TEST_CASE("columns chosen by name or 1-based position", "[csv]") {
  const char* text = "bias_v,meas_a,vdrop\n5,1e-3,0.6\n";
  IvCsvOptions o;
  o.v_col = "VDROP";
  o.i_col = "2";
  const auto r = parse_iv_csv(text, o);
  REQUIRE(r.ok());
  CHECK(r.points[0].v == 0.6);
  CHECK(r.points[0].i_a == 1e-3);
  o.v_col = "3";
  o.i_col = "meas_a";
  CHECK(parse_iv_csv(text, o).points.at(0).v == 0.6);
}

TEST_CASE("bad files give one exact line each", "[csv]") {
  struct Case {
    const char* text;
    const char* v_col;
    const char* error;
  };
  const Case cases[] = {
      {"", "", "no header line (expected column names such as v_v,i_a)"},
      {"# only comments\n", "", "no header line (expected column names such as v_v,i_a)"},
      {"a,b\n1,2\n", "", "no voltage column (header: 'a', 'b'); name it v, u, voltage (a unit may follow: v_mv) or choose one with --v-col"},
      {"v,b\n1,2\n", "", "no current column (header: 'v', 'b'); name it i, current (a unit may follow: i_ma) or choose one with --i-col"},
      {"v,voltage,i\n1,1,2\n", "", "two voltage columns ('v' and 'voltage'); pick one with --v-col"},
      {"v,i\n0.6,abc\n", "", "line 2, column 2 (i): 'abc' is not a number"},
      {"v,i\n0.5,1e-4\n0.6x,1e-3\n", "", "line 3, column 1 (v): '0.6x' is not a number"},
      {"v,i\n+-0.5,1e-4\n", "", "line 2, column 1 (v): '+-0.5' is not a number"},
      {"v,i\n0.5,++1e-4\n", "", "line 2, column 2 (i): '++1e-4' is not a number"},
      {"v,i\n0.6,\n", "", "line 2, column 2 (i): empty value"},
      {"v,i\n0.6,nan\n", "", "line 2, column 2 (i): 'nan' is not a finite number"},
      {"v,i\n0.6,inf\n", "", "line 2, column 2 (i): 'inf' is not a finite number"},
      {"v,x,i\n0.6,1\n", "", "line 2: 2 field(s), the header has 3"},
      {"v [furlong],i\n0.6,1\n", "", "column 1: unit 'furlong' is not a voltage unit (V, mV, uV)"},
      {"v,i [V]\n0.6,1\n", "", "column 2: unit 'V' is not a current unit (A, mA, uA, nA, pA)"},
      {"v,i\n0.6,1\n", "7", "--v-col 7: the header has 2 columns"},
      {"v,i\n0.6,1\n", "volts", "--v-col volts: no such column (header: 'v', 'i')"},
      {"v,i\n0.6,1\n", "i", "the voltage and current columns are the same column"},
  };
  for (const auto& c : cases) {
    INFO(c.text);
    IvCsvOptions o;
    o.v_col = c.v_col;
    const auto r = parse_iv_csv(c.text, o);
    CHECK(r.error == c.error);
    CHECK(r.error.find('\n') == std::string::npos);
  }
}

// Unit-marked headers and decimal commas (issue: mV/mA columns were read as V/A).
// Expected values: the SI prefixes m = 1e-3, u = 1e-6 (BIPM SI Brochure, 9th ed., table 7).
TEST_CASE("unit suffixes in column names and decimal commas", "[csv]") {
  struct Case {
    const char* text;
    bool decimal_comma;
    double v, i;
  };
  const Case cases[] = {
      {"v_mv,i_ma\n600,1\n", false, 0.6, 1e-3},
      {"V_mV,I_mA\n600,1\n", false, 0.6, 1e-3},
      {"v_v,i_ua\n0.6,1000\n", false, 0.6, 1e-3},
      {"voltage_mv,current_na\n600,1e6\n", false, 0.6, 1e-3},
      {"U,I\n0.6,1e-3\n", false, 0.6, 1e-3},
      {"U;I\n0,6;0,001\n", true, 0.6, 1e-3},
      {"u_mv\ti_ma\n600,5\t1,0\n", true, 0.6005, 1e-3},
      {"t_s;v_mv;i_ma\n0,5;600;1\n", true, 0.6, 1e-3},
  };
  for (const auto& c : cases) {
    INFO(c.text);
    IvCsvOptions o;
    o.decimal_comma = c.decimal_comma;
    const auto r = parse_iv_csv(c.text, o);
    REQUIRE(r.error.empty());
    REQUIRE(r.points.size() == 1);
    CHECK(r.points[0].v == Approx(c.v).epsilon(1e-12));
    CHECK(r.points[0].i_a == Approx(c.i).epsilon(1e-12));
  }
  struct Bad {
    const char* text;
    bool decimal_comma;
    const char* error;
  };
  const Bad bad[] = {
      {"v_mv,i_mv\n600,1\n", false, "column 2: unit 'mv' is not a current unit (A, mA, uA, nA, pA)"},
      {"U;I\n0,6;0,001\n", false, "line 2, column 1 (u): '0,6' is not a number (decimal comma? junco fit --decimal-comma reads them)"},
      {"U,I\n0,6,0,001\n", true, "line 1: with decimal commas the columns must be separated by ';' or tab, and the header has ','"},
  };
  for (const auto& b : bad) {
    INFO(b.text);
    IvCsvOptions o;
    o.decimal_comma = b.decimal_comma;
    CHECK(parse_iv_csv(b.text, o).error == b.error);
  }
}
