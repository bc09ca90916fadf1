#include "tools/junco/plot_gnuplot.hpp"

#include <cstdlib>
#include <fstream>
#include <sys/wait.h>

namespace junco::cli {

namespace {
bool ends_with(const std::string& s, const std::string& tail) {
  return s.size() >= tail.size() && s.compare(s.size() - tail.size(), tail.size(), tail) == 0;
}
std::string quote(const std::string& s) {
  std::string q = "'";
  for (char c : s) q += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return q + "'";
}
}  // namespace

std::string gnuplot_literal(const std::string& text) {
  std::string q = "'";
  for (char c : text) {
    if (c == '\'') q += "''";  // the only escape inside a single-quoted gnuplot string
    else if (static_cast<unsigned char>(c) < 0x20) q += ' ';
    else q += c;
  }
  return q + "'";
}

std::string run_gnuplot(const PlotJob& job) {
  const bool png = ends_with(job.output_path, ".png");
  if (!png && !ends_with(job.output_path, ".svg")) return "output must end in .svg or .png";
  const std::string script = job.output_path + ".gp";
  {
    std::ofstream f(script);
    for (std::size_t k = 0; k < job.datablocks.size(); ++k)
      f << "$d" << k << " << EOD\n" << job.datablocks[k] << "EOD\n";
    if (png)
      f << "set terminal pngcairo size " << job.width_px << "," << job.height_px << " font 'Sans,11'\n";
    else
      f << "set terminal svg size " << job.width_px << "," << job.height_px << " dynamic font 'Sans,12' background '#ffffff'\n";
    f << "set output " << gnuplot_literal(job.output_path) << "\nset grid\nset key top left box opaque\n" << job.body << "\nunset output\n";
    if (!f) return "cannot write " + script;
  }
  const int status = std::system(("gnuplot " + quote(script) + " 2>" + quote(job.output_path + ".log")).c_str());
  if (status != 0 || !WIFEXITED(status) || WEXITSTATUS(status) != 0)
    return "gnuplot failed (is gnuplot-nox installed? see " + job.output_path + ".log)";
  return "";
}

}  // namespace junco::cli
