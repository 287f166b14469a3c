// `ringdown freq`: see freq.hpp. Order of work, so that a failure leaves no
// output file behind and says why: flags -> load -> input source and sweep
// (flags over the file) -> analysis -> CSV to a temporary, committed only
// when complete -> summary -> Bode plot -> warnings.
#include "cli/freq.hpp"

#include <CLI/CLI.hpp>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <memory>
#include <optional>
#include <string>

#include "cli/atomic_file.hpp"
#include "cli/bode_plot.hpp"
#include "cli/console.hpp"
#include "cli/csv_writer.hpp"
#include "cli/exit_codes.hpp"
#include "cli/quantity.hpp"
#include "cli/run.hpp"  // split_signal_list
#include "parser/load.hpp"
#include "parser/suggest.hpp"
#include "parser/units.hpp"
#include "solver/frequency.hpp"

namespace ringdown::cli {

namespace {

// %.17g round-trips any double (IEEE 754-2008, section 5.12.2).
constexpr int kMaxDigits = 17;
// NETLIST.md section 7: per_decade defaults to 50.
constexpr int kDefaultPerDecade = 50;
// Digits of the frequencies and gains in the summary (common practice, no source).
constexpr int kSummaryDigits = 6;

std::string trim(const std::string& s) {
  const auto first = s.find_first_not_of(" \t");
  if (first == std::string::npos) return {};
  const auto last = s.find_last_not_of(" \t");
  return s.substr(first, last - first + 1);
}

bool is_source(const Part& p) {
  return p.kind == ElementKind::VoltageSource || p.kind == ElementKind::CurrentSource;
}

// The input part index, or -1 after printing why not.
int resolve_input(const FreqOptions& o, const Circuit& c) {
  std::vector<std::string> sources;
  for (const Part& p : c.parts)
    if (is_source(p)) sources.push_back(p.name);
  if (o.input.empty()) {
    if (c.frequency && c.frequency->input_part >= 0) return c.frequency->input_part;
    print_error("'" + c.file + "' names no input source for the frequency response",
                sources.empty() ? "the circuit has no voltage or current source to drive it"
                                : "pass --input " + sources.front() + " or add `frequency ... input=" +
                                      sources.front() + "`");
    return -1;
  }
  const int part = c.find_part(o.input);
  if (part >= 0 && is_source(c.parts[static_cast<std::size_t>(part)])) return part;
  const std::string near = suggest(o.input, sources);
  std::string hint;
  if (!near.empty()) {
    hint = "did you mean '" + near + "'?";
  } else if (!sources.empty()) {
    hint = "sources: ";
    for (std::size_t i = 0; i < sources.size(); ++i) hint += (i ? ", " : "") + sources[i];
  }
  print_error("--input " + o.input +
                  (part < 0 ? ": no such element" : ": is not a voltage or current source"),
              hint);
  return -1;
}

std::optional<double> frequency_flag(const char* flag, const std::string& text) {
  const QuantityResult q = parse_quantity(text, "Hz");
  if (!q.value) {
    print_error(std::string(flag) + ": " + q.error, q.hint);
    return std::nullopt;
  }
  if (!(*q.value > 0) || !std::isfinite(*q.value)) {
    print_error(std::string(flag) + ": the frequency must be greater than 0, got '" + text + "'");
    return std::nullopt;
  }
  return q.value;
}

std::string db_text(double db) {
  if (!std::isfinite(db)) return "-inf dB (zero)";
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*g dB", kSummaryDigits, db);
  return buf;
}

std::string deg_text(double deg) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*g deg", kSummaryDigits, deg);
  return buf;
}

std::string hz(double f) { return format_si(f, "Hz", kSummaryDigits); }

void print_summary(std::FILE* out, const Circuit& c, const Part& input, double from, double to,
                   int per_decade, const solver::FrequencyResult& r, std::optional<double> phase_at,
                   const std::string& csv, const std::string& plot, int warnings) {
  const std::string title = c.title.empty() ? c.file : c.title;
  std::fprintf(out, "%s\n", title.c_str());
  if (!c.title.empty()) std::fprintf(out, "  file         %s\n", c.file.c_str());
  std::fprintf(out, "  input        %s (%s source, amplitude %s)\n", input.name.c_str(), kind_name(input.kind),
               input.kind == ElementKind::CurrentSource ? "1 A" : "1 V");
  std::fprintf(out, "  frequency    from=%s to=%s per_decade=%d (%zu points)\n", hz(from).c_str(),
               hz(to).c_str(), per_decade, r.freq.size());
  if (!csv.empty()) std::fprintf(out, "  csv          %s\n", csv == "-" ? "stdout" : csv.c_str());
  if (!plot.empty()) std::fprintf(out, "  plot         %s\n", plot.c_str());
  for (const solver::SignalResponse& s : r.signals) {
    const solver::FrequencyFigures& f = s.figures;
    std::fprintf(out, "\n%s\n", s.name.c_str());
    std::fprintf(out, "  dc_gain      %s%s\n", db_text(f.dc_gain_db).c_str(),
                 f.dc_at_lowest ? (" (at " + hz(r.freq.front()) + ": no DC solution)").c_str() : "");
    if (f.corner_hz)
      std::fprintf(out, "  corner       %s (-3.0103 dB from dc_gain)\n", hz(*f.corner_hz).c_str());
    else
      std::fprintf(out, "  corner       none in the sweep\n");
    std::fprintf(out, "  peak_gain    %s\n", db_text(f.peak_db).c_str());
    std::fprintf(out, "  peak_freq    %s\n", hz(f.peak_hz).c_str());
    if (phase_at) {
      if (f.phase_at_deg)
        std::fprintf(out, "  phase_at     %s at %s\n", deg_text(*f.phase_at_deg).c_str(), hz(*phase_at).c_str());
      else
        std::fprintf(out, "  phase_at     undefined at %s (singular)\n", hz(*phase_at).c_str());
    }
  }
  std::fprintf(out, "\n  warnings     %d%s\n", warnings, warnings ? " (on stderr)" : "");
  std::fflush(out);
}

// One CSV row with empty fields where the gain is -inf (an exactly zero
// response has no dB value and no phase): RFC 4180 allows empty fields.
bool write_row(CsvWriter& csv, std::FILE* stream, int digits, double f, const std::vector<double>& values) {
  bool finite = true;
  for (double v : values) finite = finite && std::isfinite(v);
  if (finite) return csv.row(f, values.data(), values.size());
  if (!csv.flush()) return false;
  std::string line;
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*g", digits, f);
  line += buf;
  for (double v : values) {
    line += ',';
    if (std::isfinite(v)) {
      std::snprintf(buf, sizeof buf, "%.*g", digits, v == 0 ? 0.0 : v);
      line += buf;
    }
  }
  line += "\r\n";
  return std::fwrite(line.data(), 1, line.size(), stream) == line.size();
}

}  // namespace

CLI::App* setup_freq(CLI::App& app, FreqOptions& o) {
  CLI::App* cmd = app.add_subcommand(
      "freq", "Frequency response from the input source to each recorded signal");
  cmd->add_option("FILE", o.file, "circuit file (.rlc)")->required();
  cmd->add_option("--input", o.input, "the driving source, replacing the file's input=")
      ->type_name("SRC");
  cmd->add_option("--from", o.from, "lowest frequency, e.g. 10Hz")->type_name("F");
  cmd->add_option("--to", o.to, "highest frequency, e.g. 10MHz")->type_name("F");
  cmd->add_option("--per-decade", o.per_decade, "points per decade (default: the file's, else 50)")
      ->type_name("N")
      ->check(CLI::Range(1, 100000));
  cmd->add_option("--phase-at", o.phase_at, "also report each signal's phase at this frequency")
      ->type_name("F");
  cmd->add_option("--set", o.set, "override a parameter (repeatable)")
      ->type_name("NAME=VALUE")
      ->allow_extra_args(false);
  cmd->add_option("--record", o.record, "signals to keep, replacing the file's record list")
      ->type_name("S,S,...")
      ->allow_extra_args(false);
  cmd->add_option("--csv", o.csv, "write freq,<signal>.db,<signal>.deg,... ('-': stdout)")
      ->type_name("PATH");
  cmd->add_option("--plot", o.plot,
                  "Bode plot of the recorded signals: term, or PATH.png|.svg|.pdf")
      ->type_name("TARGET");
  cmd->add_option("--digits", o.digits, "significant digits in the CSV (default 12)")
      ->type_name("N")
      ->check(CLI::Range(1, kMaxDigits));
  cmd->add_flag("--quiet", o.quiet, "print no summary");
  cmd->add_flag("--strict", o.strict, "treat warnings as errors (exit 2)");
  return cmd;
}

int run_freq(const FreqOptions& o) {
  if (!readable_or_report(o.file)) return kExitBadInput;
  if (o.digits < 1 || o.digits > kMaxDigits) {
    print_error("--digits takes a whole number from 1 to 17, got " + std::to_string(o.digits));
    return kExitBadInput;
  }
  std::optional<PlotTarget> plot_target;
  if (!o.plot.empty() && !(plot_target = plot_target_or_report(o.plot, o.csv == "-")))
    return kExitBadInput;
  std::optional<double> flag_from, flag_to, phase_at;
  if (!o.from.empty() && !(flag_from = frequency_flag("--from", o.from))) return kExitBadInput;
  if (!o.to.empty() && !(flag_to = frequency_flag("--to", o.to))) return kExitBadInput;
  if (!o.phase_at.empty() && !(phase_at = frequency_flag("--phase-at", o.phase_at))) return kExitBadInput;

  LoadOptions load_options;
  for (const std::string& entry : o.set) {
    const auto eq = entry.find('=');
    if (eq == std::string::npos || trim(entry.substr(0, eq)).empty() || trim(entry.substr(eq + 1)).empty()) {
      print_error("--set takes NAME=VALUE, got '" + entry + "'", "for example --set R=47 or --set C=100pF");
      return kExitBadInput;
    }
    load_options.overrides.emplace_back(trim(entry.substr(0, eq)), trim(entry.substr(eq + 1)));
  }
  for (const std::string& list : o.record) {
    for (const std::string& s : split_signal_list(list)) {
      if (s.empty()) {
        print_error("--record: empty signal name in '" + list + "'", "separate names with single commas: --record out,L1.i");
        return kExitBadInput;
      }
      load_options.records.push_back(s);
    }
  }

  // --- Circuit ------------------------------------------------------------------
  LoadResult loaded = load_file(o.file, load_options);
  if (!loaded.ok()) {
    print_diagnostics(loaded.diagnostics, o.strict);
    return kExitBadInput;
  }
  const Circuit& c = *loaded.circuit;
  Diagnostics warnings;
  for (const Diagnostic& d : loaded.diagnostics)
    if (d.severity != Severity::Error) warnings.push_back(d);
  if (o.strict && !warnings.empty()) {
    print_diagnostics(warnings, true);
    return kExitBadInput;
  }

  // --- Input and sweep (flags over the file) --------------------------------------
  const int input = resolve_input(o, c);
  if (input < 0) return kExitBadInput;
  const double from = flag_from ? *flag_from : c.frequency ? c.frequency->from : 0;
  const double to = flag_to ? *flag_to : c.frequency ? c.frequency->to : 0;
  if (!(from > 0) || !(to > 0)) {
    print_error("'" + c.file + "' has no frequency statement and " +
                    (from > 0 ? "--to" : to > 0 ? "--from" : "--from/--to") + " was not given",
                "add a line such as `frequency from=10Hz to=10MHz input=V1`, or pass --from and --to");
    return kExitBadInput;
  }
  if (!(from < to)) {
    print_error("the sweep needs from < to (from = " + hz(from) + ", to = " + hz(to) + ")",
                "swap the bounds or widen the range");
    return kExitBadInput;
  }
  const int per_decade = o.per_decade > 0 ? o.per_decade
                         : c.frequency   ? c.frequency->per_decade
                                         : kDefaultPerDecade;
  if (c.records.empty()) {
    print_error("'" + c.file + "' records no signal: nothing to respond",
                "add a line such as `record out`, or pass --record out");
    return kExitBadInput;
  }

  // --- Analysis ---------------------------------------------------------------------
  solver::FrequencyOptions fo;
  fo.from = from;
  fo.to = to;
  fo.per_decade = per_decade;
  fo.input_part = input;
  fo.phase_at = phase_at;
  fo.strict = o.strict;
  Diagnostics diagnostics;
  const solver::FrequencyResult r = solver::run_frequency(c, c.records, fo, diagnostics);
  const auto fail = [&](int code) {
    Diagnostics all = warnings;
    all.insert(all.end(), diagnostics.begin(), diagnostics.end());
    print_diagnostics(all, o.strict);
    return code;
  };
  if (r.status == solver::Status::BadInput) return fail(kExitBadInput);
  if (r.status == solver::Status::Numerical) return fail(kExitNumerical);
  for (const Diagnostic& d : diagnostics) {
    if (d.severity == Severity::Error) return fail(kExitNumerical);
    warnings.push_back(d);
  }
  if (o.strict) {
    for (const Diagnostic& d : warnings)
      if (d.severity == Severity::Warning) return fail(kExitBadInput);
  }

  // --- CSV (a temporary, renamed over the target when complete) ---------------------
  const bool csv_to_stdout = o.csv == "-";
  if (!o.csv.empty()) {
    std::unique_ptr<AtomicFile> file;
    std::FILE* stream = stdout;
    if (!csv_to_stdout) {
      file = std::make_unique<AtomicFile>(o.csv);
      if (!file->ok()) {
        print_error(file->error());
        return kExitBadInput;
      }
      stream = file->stream();
    }
    // CsvWriter::header starts with "time"; the frequency header (CLI.md) is
    // written here with the same RFC 4180 quoting.
    std::string head = "freq";
    for (const solver::SignalResponse& s : r.signals)
      head += "," + csv_field(s.name + ".db") + "," + csv_field(s.name + ".deg");
    head += "\r\n";
    bool ok = std::fwrite(head.data(), 1, head.size(), stream) == head.size();
    {
      CsvWriter csv(stream, o.digits);
      std::vector<double> values(2 * r.signals.size());
      for (std::size_t i = 0; i < r.freq.size() && ok; ++i) {
        for (std::size_t k = 0; k < r.signals.size(); ++k) {
          values[2 * k] = r.signals[k].db[i];
          values[2 * k + 1] = std::isfinite(r.signals[k].db[i]) ? r.signals[k].deg[i]
                                                                : std::nan("");
        }
        ok = write_row(csv, stream, o.digits, r.freq[i], values);
      }
      ok = ok && csv.flush();
      if (!ok) csv.abandon();
    }
    if (!ok) {
      print_error("cannot write the CSV " + (csv_to_stdout ? std::string("to stdout") : "'" + o.csv + "'") +
                  ": " + std::strerror(errno));
      if (file) file->discard();
      return fail(kExitBadInput);
    }
    if (file && !file->commit()) {
      print_error(file->error());
      return fail(kExitBadInput);
    }
  }

  int warning_count = 0;
  for (const Diagnostic& d : warnings) warning_count += d.severity == Severity::Warning;
  if (!o.quiet)
    print_summary(csv_to_stdout ? stderr : stdout, c, c.parts[static_cast<std::size_t>(input)],
                  from, to, per_decade, r, phase_at, o.csv, o.plot, warning_count);
  int status = kExitOk;
  if (plot_target) {
    if (!o.quiet && plot_target->text()) std::fputc('\n', stdout);
    BodeRequest request;
    request.target = *plot_target;
    request.title = c.title.empty() ? c.file : c.title;
    request.input = c.parts[static_cast<std::size_t>(input)].name;
    request.from = from;
    request.to = to;
    std::string error;
    if (!draw_bode(request, r, error)) {
      print_error(error);
      status = kExitBadInput;
    }
  }
  print_diagnostics(warnings, false);
  return status;
}

}  // namespace ringdown::cli
