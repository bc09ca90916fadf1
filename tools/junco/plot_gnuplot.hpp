// Runs gnuplot on a generated script and data blocks. Plots are written by
// gnuplot (Debian gnuplot-nox) rather than by hand-made SVG: it gives log
// axes, tick labels and legends for free, renders SVG and PNG from one script,
// and the script it ran is kept beside the output for anyone to edit.
#pragma once

#include <string>
#include <vector>

namespace junco::cli {

struct PlotJob {
  std::string output_path;            // .svg or .png decides the terminal
  std::vector<std::string> datablocks;  // $d0, $d1, ... inline data (rows "x y ...")
  std::string body;                     // gnuplot commands after the terminal setup
  int width_px = 800, height_px = 600;
};

// A gnuplot single-quoted string literal holding `text` verbatim. Labels and
// paths come from files a user did not write (model documents, CSV names):
// a quote must not end the literal (gnuplot scripts can run shell commands),
// and a newline must not start a new command. Use with `noenhanced` so '_'
// and '^' in labels are not read as sub/superscripts.
std::string gnuplot_literal(const std::string& text);

// Writes OUTPUT.gp next to the output and runs gnuplot. Returns "" on success,
// else a one-line reason.
std::string run_gnuplot(const PlotJob& job);

}  // namespace junco::cli
