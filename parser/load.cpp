// Loading: text -> statements (grammar.cpp) -> elaborated Circuit.
//
// Passes, each reporting every problem it finds and going on with the next
// statement (so a file with several mistakes shows them all, in file order):
//  1. read: split each file into statements, parse each with the X3 grammar,
//     follow `include` (relative to the including file, cycles refused),
//     collect `block ... end` bodies;
//  2. elaborate: parameters are evaluated lazily in any order (cycles are
//     named), elements and `use` instances become flat Elements/Parts with
//     hierarchical names, values are checked for units and plausibility,
//     waveforms become objects; analysis statements become requests;
//  3. resolve: names that may refer forward (through=, couple, records,
//     reports, expects, frequency input) are looked up, with did-you-mean
//     hints; node warnings are issued.
// Pass 1 fills a ParsedSource::Data (files, statements, syntax trees, blocks
// and pass 1's diagnostics) that passes 2 and 3 only read: a Loader for an
// elaboration keeps everything it makes, the --set and --record texts and
// their trees included, in its own members, so one parse can be elaborated
// many times and from several threads at once (sweep points); load_file and
// load_text are parse + elaborate, the one code path.
// Internally every name table is a hash map, so a 100,000-element file loads
// in linear time. What is not done here: running anything (mna, solver), or
// checking v0/i0 against the network (that needs the operating point).
#include "parser/load.hpp"

#include <algorithm>
#include <cmath>
#include <deque>
#include <filesystem>
#include <fstream>
#include <functional>
#include <limits>
#include <map>
#include <memory>
#include <numbers>
#include <set>
#include <sstream>
#include <unordered_map>
#include <unordered_set>

#include "parser/ast.hpp"
#include "parser/csv.hpp"
#include "parser/eseries.hpp"
#include "parser/grammar.hpp"
#include "parser/literal.hpp"
#include "parser/source.hpp"
#include "parser/suggest.hpp"

namespace ringdown {

namespace {

namespace fs = std::filesystem;
namespace x3 = boost::spirit::x3;

// --- Small helpers ------------------------------------------------------------

struct Quantity {
  double value = 0;
  Unit unit;
};

std::string unit_text(const Unit& unit) {
  if (!unit) return "no unit";
  return unit_description(*unit);
}

const ast::Tagged& tagged(const ast::Operand& op) {
  struct Visitor {
    const ast::Tagged* operator()(const ast::Number& n) const { return &n; }
    const ast::Tagged* operator()(const ast::Name& n) const { return &n; }
    const ast::Tagged* operator()(const ast::String& n) const { return &n; }
    const ast::Tagged* operator()(const x3::forward_ast<ast::Call>& n) const { return &n.get(); }
    const ast::Tagged* operator()(const x3::forward_ast<ast::Group>& n) const { return &n.get(); }
    const ast::Tagged* operator()(const x3::forward_ast<ast::Unary>& n) const { return &n.get(); }
    const ast::Tagged* operator()(const x3::forward_ast<ast::Chain>& n) const { return &n.get(); }
  };
  return *boost::apply_visitor(Visitor{}, op.get());
}

// Peel chains of length one and single-item groups: `((x))` -> x.
const ast::Operand& unwrap(const ast::Operand& op) {
  if (auto* chain = boost::get<x3::forward_ast<ast::Chain>>(&op.get())) {
    if (chain->get().tail.empty()) return unwrap(chain->get().head);
  }
  if (auto* group = boost::get<x3::forward_ast<ast::Group>>(&op.get())) {
    if (group->get().items.size() == 1) return unwrap(group->get().items[0]);
  }
  return op;
}

// Like unwrap, but keeps a parenthesised group (a list of one is still a list).
const ast::Operand& unwrap_chain(const ast::Operand& op) {
  if (auto* chain = boost::get<x3::forward_ast<ast::Chain>>(&op.get())) {
    if (chain->get().tail.empty()) return unwrap_chain(chain->get().head);
  }
  return op;
}

const ast::Name* as_name(const ast::Operand& op) {
  return boost::get<ast::Name>(&unwrap(op).get());
}
const ast::String* as_string(const ast::Operand& op) {
  return boost::get<ast::String>(&unwrap(op).get());
}
const ast::Call* as_call(const ast::Operand& op) {
  if (auto* c = boost::get<x3::forward_ast<ast::Call>>(&unwrap(op).get())) return &c->get();
  return nullptr;
}
const ast::Group* as_group(const ast::Operand& op) {
  if (auto* g = boost::get<x3::forward_ast<ast::Group>>(&unwrap_chain(op).get())) return &g->get();
  return nullptr;
}

std::string text_of(const ast::Tagged& t) {
  if (!t.first || !t.last) return {};
  std::string s(t.first, t.last);
  // Collapse the blanks of continuation lines into single spaces.
  std::string out;
  bool space = false;
  for (char c : s) {
    if (c == '\n' || c == '\r' || c == '\t' || c == ' ') {
      space = true;
      continue;
    }
    if (space && !out.empty()) out += ' ';
    space = false;
    out += c;
  }
  return out;
}
std::string text_of(const ast::Operand& op) { return text_of(tagged(op)); }

bool is_whole(double v) { return std::isfinite(v) && v == std::floor(v); }

std::string join(const std::vector<std::string>& words, const std::string& sep) {
  std::string out;
  for (std::size_t k = 0; k < words.size(); ++k) out += (k ? sep : "") + words[k];
  return out;
}

const std::set<std::string>& reserved_words() {
  static const std::set<std::string> words = {
      "title", "block", "end", "use", "include", "transient", "frequency", "modes", "record",
      "report", "expect", "within", "sweep", "trials", "gnd", "pi", "t",
      // element kinds
      "resistor", "capacitor", "inductor", "voltage", "current", "vcvs", "vccs", "ccvs", "cccs",
      "couple", "switch",
      // waveforms
      "step", "pulse", "sine", "approach", "points", "samples", "formula",
      // figures
      "max", "min", "peak", "pp", "tmax", "tmin", "final", "at", "mean", "rms", "integral",
      "slope", "energy", "power", "overshoot", "undershoot", "rise", "settle", "ringfreq",
      "damping", "when"};
  return words;
}

bool is_waveform_name(const std::string& f) {
  static const std::set<std::string> names = {"step",   "pulse",   "sine",   "approach",
                                              "points", "samples", "formula"};
  return names.count(f) > 0;
}

// Dimension of each unit-carrying quantity a statement expects.
struct Expected {
  std::optional<Dimension> dim;  // nullopt: anything (no check)
  const char* what = "";         // "a capacitance", "a time"...
};
Expected expect_dim(Dimension d, const char* what) { return {d, what}; }

// --- Parameters and scopes ----------------------------------------------------

struct Stmt;
struct Scope;

struct ParamDef {
  std::string name;       // as written
  std::string full_name;  // "SN1.R" inside an instance
  const ast::Operand* expr = nullptr;
  const ast::Tagged* name_token = nullptr;  // for diagnostics
  Scope* eval_scope = nullptr;              // where expr's names are looked up
  enum class State { Pending, Busy, Done, Failed } state = State::Pending;
  Quantity q;
  // A parameter that only a sweep defines takes the sweep's first value.
  const ast::SweepLine* sweep = nullptr;
  bool overridden = false;
};

struct Scope {
  Scope* parent = nullptr;
  std::string prefix;  // "" global, "SN1." inside instance SN1
  std::unordered_map<std::string, ParamDef*> params;
  ParamDef* find(const std::string& name) {
    for (Scope* s = this; s; s = s->parent) {
      auto it = s->params.find(name);
      if (it != s->params.end()) return it->second;
    }
    return nullptr;
  }
};

// A statement as read, with the file it came from and its reading order.
struct Stmt {
  const SourceFile* file = nullptr;
  const char* first = nullptr;
  const char* last = nullptr;
  ast::Statement ast;
  int seq = 0;
};

struct BlockDef {
  std::string name;
  const Stmt* header = nullptr;
  std::vector<std::string> ports;
  std::vector<const ast::Attribute*> defaults;
  std::vector<const Stmt*> body;
};

// Compiled formula(...) body: a small tree evaluated at each t (the engine's fit evaluates
// it millions of times: functions are dispatched by id, arguments kept off the heap).
struct FormulaNode {
  enum class Kind { Const, Time, Neg, Add, Sub, Mul, Div, Pow, Func } kind = Kind::Const;
  enum class Fn { Sqrt, Exp, Log, Log10, Sin, Cos, Tan, Atan, Abs, Pow, Min, Max } fn = Fn::Sqrt;
  double value = 0;
  std::vector<FormulaNode> args;
};

FormulaNode::Fn function_id(const std::string& f) {
  using F = FormulaNode::Fn;
  static const std::map<std::string, F> ids = {
      {"sqrt", F::Sqrt}, {"exp", F::Exp}, {"log", F::Log},   {"log10", F::Log10},
      {"sin", F::Sin},   {"cos", F::Cos}, {"tan", F::Tan},   {"atan", F::Atan},
      {"abs", F::Abs},   {"pow", F::Pow}, {"min", F::Min},   {"max", F::Max}};
  return ids.at(f);
}

double apply_function(const std::string& f, const std::vector<double>& a) {
  if (f == "sqrt") return std::sqrt(a[0]);
  if (f == "exp") return std::exp(a[0]);
  if (f == "log") return std::log(a[0]);
  if (f == "log10") return std::log10(a[0]);
  if (f == "sin") return std::sin(a[0]);
  if (f == "cos") return std::cos(a[0]);
  if (f == "tan") return std::tan(a[0]);
  if (f == "atan") return std::atan(a[0]);
  if (f == "abs") return std::fabs(a[0]);
  if (f == "pow") return std::pow(a[0], a[1]);
  if (f == "min") return *std::min_element(a.begin(), a.end());
  if (f == "max") return *std::max_element(a.begin(), a.end());
  return std::numeric_limits<double>::quiet_NaN();
}

double evaluate_formula(const FormulaNode& n, double t) {
  using K = FormulaNode::Kind;
  switch (n.kind) {
    case K::Const: return n.value;
    case K::Time: return t;
    case K::Neg: return -evaluate_formula(n.args[0], t);
    case K::Add: return evaluate_formula(n.args[0], t) + evaluate_formula(n.args[1], t);
    case K::Sub: return evaluate_formula(n.args[0], t) - evaluate_formula(n.args[1], t);
    case K::Mul: return evaluate_formula(n.args[0], t) * evaluate_formula(n.args[1], t);
    case K::Div: return evaluate_formula(n.args[0], t) / evaluate_formula(n.args[1], t);
    case K::Pow: return std::pow(evaluate_formula(n.args[0], t), evaluate_formula(n.args[1], t));
    case K::Func: {
      using F = FormulaNode::Fn;
      const double a = evaluate_formula(n.args[0], t);
      switch (n.fn) {
        case F::Sqrt: return std::sqrt(a);
        case F::Exp: return std::exp(a);
        case F::Log: return std::log(a);
        case F::Log10: return std::log10(a);
        case F::Sin: return std::sin(a);
        case F::Cos: return std::cos(a);
        case F::Tan: return std::tan(a);
        case F::Atan: return std::atan(a);
        case F::Abs: return std::fabs(a);
        case F::Pow: return std::pow(a, evaluate_formula(n.args[1], t));
        case F::Min:
        case F::Max: {
          double r = a;
          for (std::size_t i = 1; i < n.args.size(); ++i) {
            const double b = evaluate_formula(n.args[i], t);
            r = n.fn == F::Min ? std::min(r, b) : std::max(r, b);
          }
          return r;
        }
      }
      return std::numeric_limits<double>::quiet_NaN();
    }
  }
  return 0;
}

struct FunctionSpec {
  int min_args;
  int max_args;
  bool dimensionless_args;  // exp log sin ...: arguments must be dimensionless
};
const std::map<std::string, FunctionSpec>& function_table() {
  static const std::map<std::string, FunctionSpec> table = {
      {"sqrt", {1, 1, false}}, {"exp", {1, 1, true}},  {"log", {1, 1, true}},
      {"log10", {1, 1, true}}, {"sin", {1, 1, true}},  {"cos", {1, 1, true}},
      {"tan", {1, 1, true}},   {"atan", {1, 1, true}}, {"abs", {1, 1, false}},
      {"min", {2, 64, false}}, {"max", {2, 64, false}}, {"pow", {2, 2, false}}};
  return table;
}

std::vector<std::string> function_names() {
  std::vector<std::string> out;
  for (const auto& [k, v] : function_table()) out.push_back(k);
  return out;
}

// --- The loader -----------------------------------------------------------------

// Where a statement's names live: the instance prefix, the port map and the
// parameter scope.
struct Context {
  Scope* scope = nullptr;
  std::string prefix;  // "" or "SN1." (also for nested: "SN1.X2.")
  const std::unordered_map<std::string, int>* ports = nullptr;
  std::vector<std::string> block_stack;  // for use-cycle detection
};

struct PendingThrough {
  int element = -1;
  std::string name;
  std::string prefix;
  const ast::Tagged* token = nullptr;
};

struct PendingCouple {
  Coupling coupling;
  std::vector<const ast::Name*> names;
  std::string prefix;
};

// A diagnostic with its place in file order (statement sequence, then offset).
struct Keyed {
  long long key;
  Diagnostic diagnostic;
};

}  // namespace

// Pass 1's product (load.hpp): everything the reading of the files made, shared read-only
// by the elaborations. The deques keep addresses stable: syntax trees point into the files'
// `code`, statements into the trees, `statement_order` and `blocks` into the deques.
struct ParsedSource::Data {
  std::string file_name;
  // load_file could not read the file (or it is a directory): `failure` is the whole result.
  bool unreadable = false;
  Diagnostics failure;
  std::deque<SourceFile> files;  // the top file first, then its includes in reading order
  std::map<const SourceFile*, std::vector<std::pair<std::size_t, int>>> statement_order;
  std::deque<Stmt> stmts;
  std::vector<const Stmt*> top;  // top-level statements, in reading order
  std::deque<BlockDef> block_defs;
  std::unordered_map<std::string, const BlockDef*> blocks;
  // Pass 1's diagnostics, unsorted (elaborate sorts them with its own), and their ids
  // for the once-per-place rule of Loader::report.
  std::vector<Keyed> diagnostics;
  std::unordered_set<std::string> seen;
  int errors = 0;
};

ParsedSource::ParsedSource(std::unique_ptr<Data> data) : data_(std::move(data)) {}
ParsedSource::~ParsedSource() = default;
const std::string& ParsedSource::file_name() const { return data_->file_name; }
bool ParsedSource::has_errors() const { return data_->unreadable || data_->errors > 0; }

namespace {

// One reading (pass 1, writing into a ParsedSource::Data) or one elaboration (passes 2 and
// 3, reading a shared Data and keeping everything it makes, --set and --record texts
// included, in its own members).
class Loader {
 public:
  // Pass 1 into `parsing` (read()).
  Loader(const LoadOptions& options, ParsedSource::Data& parsing)
      : options_(options), pass1_(&parsing), parsed_(&parsing) {}
  // Passes 2 and 3 on a finished pass 1 (elaborate()); `parsed` is only read.
  Loader(const LoadOptions& options, const ParsedSource::Data& parsed)
      : options_(options), parsed_(&parsed) {}

  void read(std::string text, const std::string& file_name);
  LoadResult elaborate();
  // fmt only needs pass 1 (syntax).
  bool syntax_only(std::string text, const std::string& file_name, Diagnostics& out);

 private:
  // --- diagnostics ---
  const SourceFile* file_of(const char* p) const {
    for (const SourceFile& f : parsed_->files) {
      if (f.contains(p)) return &f;
    }
    for (const SourceFile& f : own_files_) {
      if (f.contains(p)) return &f;
    }
    return nullptr;
  }
  long long order_key(const char* p) const {
    const SourceFile* f = file_of(p);
    if (!f || f->command_line) return std::numeric_limits<long long>::max() / 2;
    auto it = parsed_->statement_order.find(f);
    long long seq = 0;
    if (it != parsed_->statement_order.end()) {
      const auto& starts = it->second;  // (offset, seq), offsets increasing
      std::size_t off = f->offset(p);
      auto pos = std::upper_bound(starts.begin(), starts.end(),
                                  std::make_pair(off, std::numeric_limits<int>::max()));
      if (pos != starts.begin()) seq = std::prev(pos)->second;
    }
    return seq * (1LL << 24) + static_cast<long long>(f->offset(p) % (1LL << 24));
  }
  void report(Severity severity, const char* first, const char* last, std::string message,
              std::string hint) {
    Diagnostic d;
    d.severity = severity;
    if (const SourceFile* f = file_of(first)) d.where = f->position(first, last);
    d.message = std::move(message);
    d.hint = std::move(hint);
    // Block bodies are elaborated once per instance: report each problem once.
    std::string id = d.where.file + ':' + std::to_string(d.where.line) + ':' +
                     std::to_string(d.where.column) + ':' + d.message;
    if (parsed_ != pass1_ && parsed_->seen.count(id)) return;
    if (!seen_.insert(id).second) return;
    if (severity == Severity::Error) ++errors_;
    diagnostics_.push_back({order_key(first), std::move(d)});
  }
  void error(const ast::Tagged& t, std::string message, std::string hint = {}) {
    report(Severity::Error, t.first, t.last, std::move(message), std::move(hint));
  }
  void error(const ast::Operand& op, std::string message, std::string hint = {}) {
    error(tagged(op), std::move(message), std::move(hint));
  }
  void warning(const ast::Tagged& t, std::string message, std::string hint = {}) {
    report(Severity::Warning, t.first, t.last, std::move(message), std::move(hint));
  }
  void error_at(const char* first, const char* last, std::string message, std::string hint = {}) {
    report(Severity::Error, first, last, std::move(message), std::move(hint));
  }
  SourcePosition where(const ast::Tagged& t) const {
    const SourceFile* f = file_of(t.first);
    return f ? f->position(t.first, t.last) : SourcePosition{};
  }
  SourcePosition where(const Stmt& s) const { return s.file->position(s.first, s.last); }

  // --- pass 1: reading ---
  SourceFile& add_file(std::string path, std::string text, bool command_line = false);
  void read_file(SourceFile& file, std::vector<std::string>& include_stack);
  void read_statement(SourceFile& file, const RawStatement& raw,
                      std::vector<std::string>& include_stack);
  void syntax_error(const SourceFile& file, const RawStatement& raw,
                    const grammar::SyntaxError& e);
  void close_open_block(const SourceFile& file);

  // --- evaluation ---
  std::optional<Quantity> eval(const ast::Operand& op, Scope* scope);
  std::optional<Quantity> eval_name(const ast::Name& n, Scope* scope);
  std::optional<Quantity> eval_call(const ast::Call& c, Scope* scope);
  std::optional<Quantity> eval_chain(const ast::Chain& c, Scope* scope);
  std::optional<Quantity> eval_param(ParamDef& p);
  std::optional<Quantity> eval_number(const ast::Number& n);
  std::optional<Quantity> combine(char op, const Quantity& a, const Quantity& b,
                                  const ast::Tagged& where, const ast::Tagged& rhs);
  std::optional<Quantity> power(const Quantity& a, const Quantity& b, const ast::Tagged& where);
  std::optional<FormulaNode> compile_formula(const ast::Operand& op, Scope* scope, Unit& unit);
  bool mentions_time(const ast::Operand& op, Scope* scope);
  std::vector<std::string> visible_parameters(Scope* scope) const;

  // Value with a unit check against what the place expects. `owner` starts
  // the message ("capacitor C1: value").
  std::optional<Quantity> eval_checked(const ast::Operand& op, Scope* scope,
                                       const Expected& expected, const std::string& owner);
  bool check_unit(const Quantity& q, const Expected& expected, const std::string& owner,
                  const ast::Operand& op, Scope* scope);
  std::optional<long> eval_count(const ast::Operand& op, Scope* scope, const std::string& owner,
                                 long minimum);

  // --- elaboration ---
  void elaborate_statement(const Stmt& stmt, Context& ctx, bool top_level);
  void elaborate_command(const Stmt& stmt, const ast::Command& cmd, Context& ctx,
                         bool top_level);
  void elaborate_element(const Stmt& stmt, const ast::Command& cmd, Context& ctx);
  void elaborate_couple(const Stmt& stmt, const ast::Command& cmd, Context& ctx);
  void elaborate_use(const Stmt& stmt, const ast::Command& cmd, Context& ctx);
  void elaborate_transient(const Stmt& stmt, const ast::Command& cmd);
  void elaborate_frequency(const Stmt& stmt, const ast::Command& cmd);
  void elaborate_trials(const Stmt& stmt, const ast::Command& cmd);
  void elaborate_title(const Stmt& stmt, const ast::Command& cmd);
  void elaborate_sweep(const Stmt& stmt, const ast::SweepLine& line);
  std::optional<std::vector<double>> sweep_values(const ast::Operand& list, Unit& unit);

  WaveformPtr eval_waveform(const ast::Operand& op, Scope* scope, const Expected& level,
                            const std::string& owner);
  WaveformPtr eval_waveform_call(const ast::Call& call, Scope* scope, const Expected& level,
                                 const std::string& owner);
  bool contains_waveform(const ast::Operand& op) const;

  int node(const ast::Name& name, Context& ctx);
  std::optional<int> node_operand(const ast::Operand& op, Context& ctx, const std::string& owner);
  int add_element(Element e);
  bool claim_name(const std::string& full, const ast::Tagged& token);
  void register_parameter(const Stmt& stmt, const ast::ParameterLine& line, Scope& scope,
                          const std::string& prefix);
  bool valid_parameter_name(const ast::Name& name);

  // --- pass 3: resolution ---
  void resolve_through();
  void resolve_couples();
  std::optional<Signal> make_signal(const ast::Operand& op, const std::string& name);
  std::optional<SignalExpr> signal_expr(const ast::Operand& op, Unit& unit);
  std::optional<SignalExpr> signal_name(const ast::Name& n, Unit& unit);
  std::optional<FigureCall> make_figure(const ast::Operand& op);
  int find_part_named(const std::string& name) const {
    auto it = part_index_.find(name);
    return it == part_index_.end() ? -1 : it->second;
  }
  std::string suggest_signal(const std::string& name) const;
  void resolve_records(const Stmt& stmt, const ast::RecordLine& line);
  void resolve_report(const Stmt& stmt, const ast::ReportLine& line);
  void resolve_expect(const Stmt& stmt, const ast::ExpectLine& line);
  void resolve_frequency_input();
  void apply_overrides();
  void apply_record_option();
  void node_warnings();

  const LoadOptions& options_;
  ParsedSource::Data* pass1_ = nullptr;      // pass 1 only: what read() fills
  const ParsedSource::Data* parsed_ = nullptr;  // the files, statements and blocks
  std::deque<SourceFile> own_files_;  // --set and --record texts of this elaboration
  std::deque<Stmt> own_stmts_;        // their parsed values (point into own_files_)
  BlockDef* open_block_ = nullptr;
  const SourceFile* open_block_file_ = nullptr;
  int seq_ = 0;

  std::vector<Keyed> diagnostics_;
  std::unordered_set<std::string> seen_;
  int errors_ = 0;

  std::deque<ParamDef> param_store_;
  std::deque<Scope> scopes_;
  Scope global_;
  std::vector<ParamDef*> global_order_;  // definition order, for Circuit::parameters
  std::vector<ParamDef*> eval_stack_;

  Circuit circuit_;
  std::unordered_map<std::string, int> node_index_;
  std::unordered_map<std::string, int> part_index_;
  std::unordered_map<std::string, const ast::Tagged*> names_;  // parts, couplings, instances
  std::vector<int> node_touches_;
  std::vector<const ast::Tagged*> node_tokens_;  // first mention (nullptr: hidden)
  std::vector<PendingThrough> pending_through_;
  std::vector<PendingCouple> pending_couples_;
  const ast::Name* frequency_input_ = nullptr;
  const Stmt* transient_stmt_ = nullptr;
  const Stmt* frequency_stmt_ = nullptr;
  const Stmt* trials_stmt_ = nullptr;
  const Stmt* title_stmt_ = nullptr;
  std::vector<std::string> override_texts_;  // keeps --set buffers alive
  std::vector<const Stmt*> command_line_sweeps_;  // --set NAME=LIST, in order
  void elaborate_command_line_sweeps();
};

// A --set value that is a sweep list: `(a, b, ...)` with two or more values, or a call of
// linear, geometric, e6, e12, e24, e96.
bool is_sweep_list(const ast::Operand& op) {
  if (const ast::Group* g = as_group(op)) return g->items.size() >= 2;
  if (const ast::Call* c = as_call(op)) {
    const std::string& f = c->function;
    return f == "linear" || f == "geometric" || f == "e6" || f == "e12" || f == "e24" || f == "e96";
  }
  return false;
}

// --- Pass 1 -----------------------------------------------------------------------

SourceFile& Loader::add_file(std::string path, std::string text, bool command_line) {
  // Files of the circuit belong to pass 1; command-line values to this elaboration.
  std::deque<SourceFile>& files = command_line ? own_files_ : pass1_->files;
  files.emplace_back();
  SourceFile& f = files.back();
  f.path = std::move(path);
  f.directory = command_line ? "" : fs::path(f.path).parent_path().string();
  f.text = std::move(text);
  f.command_line = command_line;
  f.prepare();
  return f;
}

void Loader::syntax_error(const SourceFile& file, const RawStatement& raw,
                          const grammar::SyntaxError& e) {
  const char* at = e.where ? e.where : raw.first;
  while (at < raw.last && (*at == ' ' || *at == '\t' || *at == '\n' || *at == '\r')) ++at;
  const char* end = at;
  auto is_tok = [](char c) {
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
           c == '_' || c == '.' || c == '%' || static_cast<unsigned char>(c) >= 0x80;
  };
  while (end < raw.last && is_tok(*end)) ++end;
  if (end == at && at < raw.last) ++end;
  std::string token(at, end);
  if (!e.expected.empty()) {
    std::string found = at >= raw.last ? "the end of the statement" : "'" + token + "'";
    std::string hint;
    if (e.expected == "')'" ) hint = "every '(' needs a matching ')'";
    error_at(at, end, "expected " + e.expected + ", found " + found, hint);
    return;
  }
  // The statement parsed up to `at` and stopped: an operator right after a
  // value means an unparenthesised expression (NETLIST.md section 3).
  const char c = *at;
  if (c == '*' || c == '/' || c == '^' || c == '+' || c == '-') {
    // Walk back to the start of the value before the operator.
    const char* start = at;
    while (start > raw.first && (start[-1] == ' ' || start[-1] == '\t')) --start;
    int depth = 0;
    while (start > raw.first) {
      char p = start[-1];
      if (p == ')') ++depth;
      else if (p == '(') { if (depth == 0) break; --depth; }
      else if ((p == ' ' || p == '\t' || p == '\n' || p == '=') && depth == 0) break;
      --start;
    }
    const char* stop = grammar::expression_end(start, raw.last);
    if (!stop || stop <= at) stop = end;
    std::string expr = text_of(ast::Tagged{start, stop});
    error_at(start, stop, "an expression as a value must be in parentheses",
             "write (" + expr + ")");
    return;
  }
  if (c == '=') {
    error_at(at, end, "unexpected '='", "attributes are written key=value, with a name before '='");
    return;
  }
  error_at(at, end, "unexpected '" + token + "'");
  (void)file;
}

void Loader::read_file(SourceFile& file, std::vector<std::string>& include_stack) {
  // A NUL byte never occurs in a text file: this is a binary (or a wrong
  // path), and reporting each of its "lines" would only flood the terminal.
  if (const auto nul = file.code.find('\0'); nul != std::string::npos) {
    const char* at = file.code.data() + nul;
    error_at(at, at + 1, "'" + file.path + "' is not a text file (it contains a NUL byte)",
             "circuit files are plain text, usually ending in .rlc");
    // Its "line" is binary: showing it would only garble the terminal.
    if (!diagnostics_.empty()) diagnostics_.back().diagnostic.where.source_line.clear();
    return;
  }
  std::vector<SplitProblem> problems;
  std::vector<RawStatement> raws = split_statements(file, problems);
  auto& order = pass1_->statement_order[&file];
  std::size_t problem = 0;
  for (const RawStatement& raw : raws) {
    order.emplace_back(file.offset(raw.first), seq_);
    ++seq_;
    while (problem < problems.size() && problems[problem].where < raw.last) {
      error_at(problems[problem].where, problems[problem].where + 1, problems[problem].message,
               problems[problem].hint);
      ++problem;
    }
    read_statement(file, raw, include_stack);
  }
  for (; problem < problems.size(); ++problem) {
    error_at(problems[problem].where, problems[problem].where + 1, problems[problem].message,
             problems[problem].hint);
  }
  if (open_block_ && open_block_file_ == &file) close_open_block(file);
}

void Loader::close_open_block(const SourceFile& file) {
  const auto& header = boost::get<ast::Command>(open_block_->header->ast.get());
  error(header.keyword, "block '" + open_block_->name + "' has no 'end' in " + file.path,
        "close the block with a line 'end'");
  open_block_ = nullptr;
  open_block_file_ = nullptr;
}

void Loader::read_statement(SourceFile& file, const RawStatement& raw,
                            std::vector<std::string>& include_stack) {
  pass1_->stmts.emplace_back();
  Stmt& stmt = pass1_->stmts.back();
  stmt.file = &file;
  stmt.first = raw.first;
  stmt.last = raw.last;
  stmt.seq = seq_ - 1;
  grammar::SyntaxError e;
  if (!grammar::parse_statement(raw.first, raw.last, stmt.ast, e)) {
    syntax_error(file, raw, e);
    pass1_->stmts.pop_back();
    return;
  }
  const ast::Command* cmd = boost::get<ast::Command>(&stmt.ast.get());
  const std::string keyword = cmd ? cmd->keyword.text : "";
  if (keyword == "include") {
    if (open_block_) {
      error(cmd->keyword, "'include' is not allowed inside a block",
            "include the file before or after the block");
      return;
    }
    const ast::String* path = nullptr;
    if (cmd->items.size() == 1) {
      if (auto* op = boost::get<ast::Operand>(&cmd->items[0].get())) path = as_string(*op);
    }
    if (!path) {
      error(cmd->keyword, "include needs one file name in double quotes",
            "include \"relative/path.rlc\"");
      return;
    }
    fs::path target = fs::path(path->text);
    if (target.is_relative()) target = fs::path(file.directory) / target;
    std::error_code ec;
    fs::path canonical = fs::weakly_canonical(target, ec);
    std::string key = ec ? target.lexically_normal().string() : canonical.string();
    auto cycle = std::find(include_stack.begin(), include_stack.end(), key);
    if (cycle != include_stack.end()) {
      std::vector<std::string> chain;
      for (auto it = cycle; it != include_stack.end(); ++it) chain.push_back(fs::path(*it).filename().string());
      chain.push_back(fs::path(key).filename().string());
      error(*path, "include cycle: " + join(chain, " -> "),
            "a file must not include itself, directly or through other files");
      return;
    }
    std::ifstream in(target, std::ios::binary);
    std::error_code dir_ec;
    if (!in || fs::is_directory(target, dir_ec)) {
      error(*path, "cannot read included file '" + target.string() + "'",
            "include paths are relative to the including file (" +
                (file.directory.empty() ? std::string(".") : file.directory) + ")");
      return;
    }
    std::ostringstream ss;
    ss << in.rdbuf();
    SourceFile& included = add_file(target.lexically_normal().string(), ss.str());
    include_stack.push_back(key);
    read_file(included, include_stack);
    include_stack.pop_back();
    return;
  }
  if (keyword == "block") {
    if (open_block_) {
      error(cmd->keyword, "blocks cannot be defined inside a block ('" + open_block_->name + "')",
            "close the first block with 'end' before starting another");
      return;
    }
    pass1_->block_defs.emplace_back();
    BlockDef& def = pass1_->block_defs.back();
    def.header = &stmt;
    std::vector<const ast::Operand*> positional;
    for (const ast::Item& it : cmd->items) {
      if (auto* a = boost::get<ast::Attribute>(&it.get())) def.defaults.push_back(a);
      else positional.push_back(&boost::get<ast::Operand>(it.get()));
    }
    const ast::Name* name = positional.empty() ? nullptr : as_name(*positional[0]);
    const ast::Group* ports = positional.size() >= 2 ? as_group(*positional[1]) : nullptr;
    bool ok = name && ports && positional.size() == 2;
    if (ok) {
      for (const ast::Operand& p : ports->items) {
        const ast::Name* port = as_name(p);
        if (!port || port->text.find('.') != std::string::npos) {
          error(tagged(p), "a port must be a node name");
          ok = false;
        } else if (port->text == "gnd") {
          error(*port, "'gnd' cannot be a port: it is the same node everywhere");
          ok = false;
        } else {
          if (std::find(def.ports.begin(), def.ports.end(), port->text) != def.ports.end()) {
            error(*port, "port '" + port->text + "' is listed twice");
            ok = false;
          }
          def.ports.push_back(port->text);
        }
      }
    } else {
      error(cmd->keyword, "expected: block NAME (port, port, ...) [param=default ...]");
    }
    def.name = name ? name->text : "?";
    open_block_ = &def;  // keep collecting the body even if the header is wrong
    open_block_file_ = &file;
    if (ok) {
      if (pass1_->blocks.count(def.name)) {
        error(*name, "block '" + def.name + "' is defined twice",
              "first defined at line " + std::to_string(where(*pass1_->blocks[def.name]->header).line));
      } else {
        pass1_->blocks[def.name] = &def;
      }
    }
    return;
  }
  if (keyword == "end" && cmd->items.empty()) {
    if (!open_block_) {
      error(cmd->keyword, "'end' without a block");
      return;
    }
    open_block_ = nullptr;
    open_block_file_ = nullptr;
    return;
  }
  if (open_block_) {
    // Only the circuit itself may sit inside a block; checked here so that
    // a block nobody uses is checked too.
    static const std::set<std::string> allowed = {
        "resistor", "capacitor", "inductor", "voltage", "current", "vcvs",
        "vccs",     "ccvs",      "cccs",     "switch",  "couple",  "use"};
    const auto& v = stmt.ast.get();
    const ast::Name* kw = cmd ? &cmd->keyword
                        : boost::get<ast::ReportLine>(&v) ? &boost::get<ast::ReportLine>(v).keyword
                        : boost::get<ast::SweepLine>(&v)  ? &boost::get<ast::SweepLine>(v).keyword
                        : boost::get<ast::RecordLine>(&v) ? &boost::get<ast::RecordLine>(v).keyword
                        : boost::get<ast::ExpectLine>(&v) ? &boost::get<ast::ExpectLine>(v).keyword
                                                          : nullptr;
    if (kw && !allowed.count(kw->text)) {
      if (is_statement_keyword(kw->text)) {
        error(*kw, "'" + kw->text + "' is not allowed inside a block",
              "move it after the block's 'end'; name an instance's parts with dots (SN1.R1)");
      } else {
        std::string near = suggest(kw->text, statement_keywords());
        error(*kw, "unknown statement '" + kw->text + "'",
              near.empty() ? "" : "did you mean '" + near + "'?");
      }
      return;
    }
    open_block_->body.push_back(&stmt);
  } else {
    pass1_->top.push_back(&stmt);
  }
}

// --- Evaluation -------------------------------------------------------------------

std::vector<std::string> Loader::visible_parameters(Scope* scope) const {
  std::vector<std::string> out;
  for (Scope* s = scope; s; s = s->parent) {
    for (const auto& [name, def] : s->params) out.push_back(name);
  }
  return out;
}

std::optional<Quantity> Loader::eval_number(const ast::Number& n) {
  LiteralError e;
  auto lit = decode_number(n.text, e);
  if (!lit) {
    error(n, e.message, e.hint);
    return std::nullopt;
  }
  return Quantity{lit->value, lit->unit};
}

std::optional<Quantity> Loader::eval_param(ParamDef& p) {
  using S = ParamDef::State;
  if (p.state == S::Done) return p.q;
  if (p.state == S::Failed) return std::nullopt;
  if (p.state == S::Busy) {
    auto it = std::find(eval_stack_.begin(), eval_stack_.end(), &p);
    std::vector<std::string> names;
    for (auto k = it; k != eval_stack_.end(); ++k) {
      names.push_back((*k)->name);
      (*k)->state = S::Failed;
    }
    names.push_back(p.name);
    error(*p.name_token, "parameters refer to each other in a cycle: " + join(names, " -> "),
          "give one of them a value that does not depend on the others");
    return std::nullopt;
  }
  if (p.sweep) {
    Unit unit;
    auto values = sweep_values(p.sweep->list, unit);
    if (!values || values->empty()) {
      p.state = S::Failed;
      return std::nullopt;
    }
    p.q = Quantity{values->front(), unit};
    p.state = S::Done;
    return p.q;
  }
  p.state = S::Busy;
  eval_stack_.push_back(&p);
  auto q = eval(*p.expr, p.eval_scope);
  eval_stack_.pop_back();
  if (p.state == S::Failed || !q) {
    p.state = S::Failed;
    return std::nullopt;
  }
  p.q = *q;
  p.state = S::Done;
  return q;
}

std::optional<Quantity> Loader::eval_name(const ast::Name& n, Scope* scope) {
  if (n.text == "pi") return Quantity{std::numbers::pi, std::nullopt};
  if (n.text == "t") {
    error(n, "'t' (time) can only be used inside formula(...)");
    return std::nullopt;
  }
  if (ParamDef* p = scope ? scope->find(n.text) : nullptr) return eval_param(*p);
  if (is_iec_code(n.text)) {
    LiteralError e;
    // "R47" reaches here as a name; decode it with a leading 0 digit-less form.
    auto lit = decode_number("0" + n.text, e);
    if (lit) return Quantity{lit->value, lit->unit};
  }
  if (n.text == "gnd") {
    error(n, "'gnd' is a node, not a value");
    return std::nullopt;
  }
  std::string hint;
  std::string near = suggest(n.text, visible_parameters(scope));
  if (!near.empty()) hint = "did you mean '" + near + "'?";
  if (n.text.find('.') != std::string::npos && hint.empty()) {
    hint = "parameters have plain names; a block's parameters are not visible outside it";
  }
  error(n, "unknown parameter '" + n.text + "'", hint);
  return std::nullopt;
}

std::optional<Quantity> Loader::combine(char op, const Quantity& a, const Quantity& b,
                                        const ast::Tagged& where, const ast::Tagged& rhs) {
  Quantity r;
  switch (op) {
    case '+':
    case '-':
      if (a.unit && b.unit && *a.unit != *b.unit) {
        error(where, std::string("cannot ") + (op == '+' ? "add" : "subtract") + " a value in " +
                         unit_text(b.unit) + (op == '+' ? " to " : " from ") + "one in " +
                         unit_text(a.unit),
              "both sides of + and - need the same unit");
        return std::nullopt;
      }
      r.unit = a.unit ? a.unit : b.unit;
      r.value = op == '+' ? a.value + b.value : a.value - b.value;
      break;
    case '*':
      if (a.unit && b.unit) r.unit = *a.unit * *b.unit;
      r.value = a.value * b.value;
      break;
    case '/':
      if (b.value == 0) {
        error(rhs, "division by zero ('" + text_of(rhs) + "' is 0)");
        return std::nullopt;
      }
      if (a.unit && b.unit) r.unit = *a.unit / *b.unit;
      r.value = a.value / b.value;
      break;
    default: return std::nullopt;
  }
  if (!std::isfinite(r.value)) {
    error(where, "the result is not a finite number (overflow)");
    return std::nullopt;
  }
  return r;
}

std::optional<Quantity> Loader::power(const Quantity& a, const Quantity& b,
                                      const ast::Tagged& where) {
  if (b.unit && !b.unit->dimensionless()) {
    error(where, "an exponent must be a plain number, not a value in " + unit_text(b.unit));
    return std::nullopt;
  }
  Quantity r;
  r.value = std::pow(a.value, b.value);
  if (a.unit) {
    if (a.unit->dimensionless()) {
      r.unit = Dimension::none();
    } else {
      const double twice = 2 * b.value;
      std::optional<Dimension> d;
      if (is_whole(twice) && std::fabs(twice) < 1000) d = a.unit->pow_half(static_cast<int>(twice));
      if (!d) {
        error(where, "a value in " + unit_text(a.unit) +
                         " can only be raised to an integer or half-integer power (here " +
                         format_si(b.value, "") + ")",
              "the result must have a unit made of whole or half powers of V, A and s");
        return std::nullopt;
      }
      r.unit = d;
    }
  }
  if (!std::isfinite(r.value)) {
    error(where, a.value < 0 ? "a negative value raised to a fractional power"
                             : "the result is not a finite number",
          "");
    return std::nullopt;
  }
  return r;
}

std::optional<Quantity> Loader::eval_chain(const ast::Chain& c, Scope* scope) {
  auto acc = eval(c.head, scope);
  if (!acc) return std::nullopt;
  if (!c.tail.empty() && c.tail[0].op == '^') {
    // power: a ^ b (right-associative, the tail holds one exponent)
    auto b = eval(c.tail[0].operand, scope);
    if (!b) return std::nullopt;
    return power(*acc, *b, c);
  }
  for (const ast::Operation& op : c.tail) {
    auto b = eval(op.operand, scope);
    if (!b) return std::nullopt;
    ast::Tagged span{c.first, op.last};
    acc = combine(op.op, *acc, *b, op.op == '/' ? static_cast<const ast::Tagged&>(op) : span,
                  tagged(op.operand));
    if (!acc) return std::nullopt;
  }
  return acc;
}

std::optional<Quantity> Loader::eval_call(const ast::Call& c, Scope* scope) {
  if (is_waveform_name(c.function)) {
    error(c, c.function + "(...) is a waveform: it can only be the value of a source or a gate",
          "for a constant, write the value itself");
    return std::nullopt;
  }
  auto spec = function_table().find(c.function);
  if (spec == function_table().end()) {
    std::string near = suggest(c.function, function_names());
    error(c, "unknown function '" + c.function + "'",
          near.empty() ? "functions: " + join(function_names(), " ")
                       : "did you mean '" + near + "'?");
    return std::nullopt;
  }
  const int n = static_cast<int>(c.args.size());
  if (n < spec->second.min_args || n > spec->second.max_args) {
    error(c, c.function + "() takes " +
                 (spec->second.min_args == spec->second.max_args
                      ? std::to_string(spec->second.min_args)
                      : "at least " + std::to_string(spec->second.min_args)) +
                 " argument" + (spec->second.min_args == 1 ? "" : "s") + ", not " +
                 std::to_string(n));
    return std::nullopt;
  }
  std::vector<Quantity> args;
  for (const ast::Argument& a : c.args) {
    if (a.key) {
      error(a, c.function + "() takes no named arguments");
      return std::nullopt;
    }
    auto q = eval(a.value, scope);
    if (!q) return std::nullopt;
    if (spec->second.dimensionless_args && q->unit && !q->unit->dimensionless()) {
      error(a, c.function + "() needs a dimensionless argument, not a value in " +
                   unit_text(q->unit),
            "divide by a reference value to make it a plain number");
      return std::nullopt;
    }
    args.push_back(*q);
  }
  const std::string& f = c.function;
  Quantity r;
  if (f == "pow") return power(args[0], args[1], c);
  if (f == "sqrt") {
    if (args[0].value < 0) {
      error(c, "square root of a negative value (" + format_si(args[0].value, "") + ")");
      return std::nullopt;
    }
    if (args[0].unit) {
      auto d = args[0].unit->pow_half(1);
      if (!d) {
        error(c, "the square root of a value in " + unit_text(args[0].unit) +
                     " has no unit made of half powers of V, A and s");
        return std::nullopt;
      }
      r.unit = d;
    }
  } else if (f == "min" || f == "max") {
    for (std::size_t k = 0; k < args.size(); ++k) {
      if (!args[k].unit) continue;
      if (r.unit && *r.unit != *args[k].unit) {
        error(c, f + "() of values in " + unit_text(r.unit) + " and " + unit_text(args[k].unit),
              "all arguments of min and max need the same unit");
        return std::nullopt;
      }
      r.unit = args[k].unit;
    }
  } else if (f == "abs") {
    r.unit = args[0].unit;
  } else {
    if ((f == "log" || f == "log10") && !(args[0].value > 0)) {
      error(c, f + "() of a value that is not positive (" + format_si(args[0].value, "") + ")");
      return std::nullopt;
    }
    r.unit = Dimension::none();  // exp, log, trigonometric: a pure number
  }
  std::vector<double> values;
  for (const Quantity& q : args) values.push_back(q.value);
  r.value = apply_function(f, values);
  if (!std::isfinite(r.value)) {
    error(c, "the result of " + f + "() is not a finite number");
    return std::nullopt;
  }
  return r;
}

std::optional<Quantity> Loader::eval(const ast::Operand& op, Scope* scope) {
  const auto& v = op.get();
  if (auto* n = boost::get<ast::Number>(&v)) return eval_number(*n);
  if (auto* n = boost::get<ast::Name>(&v)) return eval_name(*n, scope);
  if (auto* s = boost::get<ast::String>(&v)) {
    error(*s, "a quoted string is not a value");
    return std::nullopt;
  }
  if (auto* c = boost::get<x3::forward_ast<ast::Call>>(&v)) return eval_call(c->get(), scope);
  if (auto* g = boost::get<x3::forward_ast<ast::Group>>(&v)) {
    if (g->get().items.size() != 1) {
      error(g->get(), "a list (a, b, ...) is not a value here");
      return std::nullopt;
    }
    return eval(g->get().items[0], scope);
  }
  if (auto* u = boost::get<x3::forward_ast<ast::Unary>>(&v)) {
    auto q = eval(u->get().operand, scope);
    if (q && u->get().op == '-') q->value = -q->value;
    return q;
  }
  if (auto* c = boost::get<x3::forward_ast<ast::Chain>>(&v)) return eval_chain(c->get(), scope);
  return std::nullopt;
}

bool Loader::mentions_time(const ast::Operand& op, Scope* scope) {
  const auto& v = op.get();
  if (auto* n = boost::get<ast::Name>(&v)) return n->text == "t" && !(scope && scope->find("t"));
  if (auto* c = boost::get<x3::forward_ast<ast::Call>>(&v)) {
    for (const auto& a : c->get().args) {
      if (mentions_time(a.value, scope)) return true;
    }
    return false;
  }
  if (auto* g = boost::get<x3::forward_ast<ast::Group>>(&v)) {
    for (const auto& a : g->get().items) {
      if (mentions_time(a, scope)) return true;
    }
    return false;
  }
  if (auto* u = boost::get<x3::forward_ast<ast::Unary>>(&v)) return mentions_time(u->get().operand, scope);
  if (auto* c = boost::get<x3::forward_ast<ast::Chain>>(&v)) {
    if (mentions_time(c->get().head, scope)) return true;
    for (const auto& o : c->get().tail) {
      if (mentions_time(o.operand, scope)) return true;
    }
  }
  return false;
}

// formula(...) bodies: parts without `t` are evaluated now (with the usual
// errors); the rest becomes a tree evaluated at run time. Units follow the
// same rules, with t in seconds.
std::optional<FormulaNode> Loader::compile_formula(const ast::Operand& op, Scope* scope,
                                                   Unit& unit) {
  using K = FormulaNode::Kind;
  if (!mentions_time(op, scope)) {
    auto q = eval(op, scope);
    if (!q) return std::nullopt;
    unit = q->unit;
    FormulaNode n;
    n.value = q->value;
    return n;
  }
  const auto& v = op.get();
  if (boost::get<ast::Name>(&v)) {
    unit = Dimension::second();
    FormulaNode n;
    n.kind = K::Time;
    return n;
  }
  if (auto* g = boost::get<x3::forward_ast<ast::Group>>(&v)) {
    if (g->get().items.size() != 1) {
      error(g->get(), "a list (a, b, ...) is not a value here");
      return std::nullopt;
    }
    return compile_formula(g->get().items[0], scope, unit);
  }
  if (auto* u = boost::get<x3::forward_ast<ast::Unary>>(&v)) {
    auto inner = compile_formula(u->get().operand, scope, unit);
    if (!inner || u->get().op == '+') return inner;
    FormulaNode n;
    n.kind = K::Neg;
    n.args.push_back(std::move(*inner));
    return n;
  }
  if (auto* cp = boost::get<x3::forward_ast<ast::Chain>>(&v)) {
    const ast::Chain& c = cp->get();
    Unit acc_unit;
    auto acc = compile_formula(c.head, scope, acc_unit);
    if (!acc) return std::nullopt;
    for (const ast::Operation& o : c.tail) {
      Unit b_unit;
      auto b = compile_formula(o.operand, scope, b_unit);
      if (!b) return std::nullopt;
      // Units by the same rules as constants (values are irrelevant here,
      // except a constant exponent).
      Quantity qa{1, acc_unit}, qb{b->kind == K::Const ? b->value : 1, b_unit};
      std::optional<Quantity> r;
      if (o.op == '^') {
        if (b->kind != K::Const && acc_unit && !acc_unit->dimensionless()) {
          error(o, "an exponent that depends on t needs a dimensionless base");
          return std::nullopt;
        }
        r = b->kind == K::Const ? power(qa, qb, o) : Quantity{1, acc_unit};
      } else {
        if (o.op == '/' && b->kind == K::Const && b->value == 0) {
          error(tagged(o.operand), "division by zero");
          return std::nullopt;
        }
        if (o.op == '/') qb.value = 1;
        r = combine(o.op, qa, qb, o, tagged(o.operand));
      }
      if (!r) return std::nullopt;
      acc_unit = r->unit;
      FormulaNode n;
      n.kind = o.op == '+' ? K::Add : o.op == '-' ? K::Sub : o.op == '*' ? K::Mul
             : o.op == '/' ? K::Div : K::Pow;
      n.args.push_back(std::move(*acc));
      n.args.push_back(std::move(*b));
      if (n.args[0].kind == K::Const && n.args[1].kind == K::Const) {
        // A constant run of a chain, such as 2*pi*1k in 2*pi*1k*t: folded now, in the same
        // left-to-right order as at run time (same rounding).
        FormulaNode folded;
        folded.value = evaluate_formula(n, 0.0);
        n = std::move(folded);
      }
      acc = std::move(n);
    }
    unit = acc_unit;
    return acc;
  }
  if (auto* cp = boost::get<x3::forward_ast<ast::Call>>(&v)) {
    const ast::Call& c = cp->get();
    auto spec = function_table().find(c.function);
    if (spec == function_table().end() || is_waveform_name(c.function)) {
      return eval_call(c, scope) ? std::nullopt : std::nullopt;  // reports the error
    }
    const int count = static_cast<int>(c.args.size());
    if (count < spec->second.min_args || count > spec->second.max_args) {
      eval_call(c, scope);  // reports the arity error
      return std::nullopt;
    }
    FormulaNode n;
    n.kind = K::Func;
    n.fn = function_id(c.function);
    std::vector<Unit> units;
    for (const ast::Argument& a : c.args) {
      Unit u;
      auto arg = compile_formula(a.value, scope, u);
      if (!arg) return std::nullopt;
      if (spec->second.dimensionless_args && u && !u->dimensionless()) {
        error(a, c.function + "() needs a dimensionless argument, not a value in " +
                     unit_text(u),
              "divide by a reference value, e.g. t/1us");
        return std::nullopt;
      }
      units.push_back(u);
      n.args.push_back(std::move(*arg));
    }
    if (c.function == "sqrt") {
      unit = units[0] ? units[0]->pow_half(1) : Unit{};
    } else if (c.function == "abs" || c.function == "min" || c.function == "max") {
      unit.reset();
      for (const Unit& u : units) {
        if (u && unit && *u != *unit) {
          error(c, c.function + "() of values in " + unit_text(unit) + " and " + unit_text(u));
          return std::nullopt;
        }
        if (u) unit = u;
      }
    } else if (c.function == "pow") {
      unit = units[0] && units[0]->dimensionless() ? units[0] : Unit{};
    } else {
      unit = Dimension::none();
    }
    return n;
  }
  return std::nullopt;
}

bool Loader::check_unit(const Quantity& q, const Expected& expected, const std::string& owner,
                        const ast::Operand& op, Scope* scope) {
  if (!expected.dim || !q.unit || *q.unit == *expected.dim) return true;
  std::string hint;
  if (const ast::Name* n = as_name(op)) {
    if (ParamDef* p = scope ? scope->find(n->text) : nullptr) {
      if (p->expr && p->overridden) {
        hint = "parameter " + p->name + " = " + text_of(*p->expr) +
               " (set on the command line) is in " + unit_text(q.unit);
      } else if (p->expr && p->name_token) {
        hint = "parameter " + p->name + " = " + text_of(*p->expr) + " (line " +
               std::to_string(where(*p->name_token).line) + ") is in " + unit_text(q.unit);
      } else {
        hint = "parameter " + p->name + " is in " + unit_text(q.unit);
      }
    }
  }
  error(tagged(op), owner + " is in " + unit_text(q.unit) + ", but " + expected.what +
                        " is in " + unit_text(*expected.dim),
        hint);
  return false;
}

std::optional<Quantity> Loader::eval_checked(const ast::Operand& op, Scope* scope,
                                             const Expected& expected, const std::string& owner) {
  auto q = eval(op, scope);
  if (!q) return std::nullopt;
  if (!check_unit(*q, expected, owner, op, scope)) return std::nullopt;
  return q;
}

std::optional<long> Loader::eval_count(const ast::Operand& op, Scope* scope,
                                       const std::string& owner, long minimum) {
  auto q = eval_checked(op, scope, expect_dim(Dimension::none(), "a count"), owner);
  if (!q) return std::nullopt;
  if (!is_whole(q->value) || q->value < static_cast<double>(minimum) || q->value > 1e15) {
    error(tagged(op), owner + " must be a whole number >= " + std::to_string(minimum) +
                          " (not " + format_si(q->value, "") + ")");
    return std::nullopt;
  }
  return static_cast<long>(q->value);
}

// --- Waveforms --------------------------------------------------------------------

bool Loader::contains_waveform(const ast::Operand& op) const {
  const auto& v = op.get();
  if (auto* c = boost::get<x3::forward_ast<ast::Call>>(&v)) return is_waveform_name(c->get().function);
  if (auto* g = boost::get<x3::forward_ast<ast::Group>>(&v)) {
    for (const auto& a : g->get().items) {
      if (contains_waveform(a)) return true;
    }
    return false;
  }
  if (auto* u = boost::get<x3::forward_ast<ast::Unary>>(&v)) return contains_waveform(u->get().operand);
  if (auto* c = boost::get<x3::forward_ast<ast::Chain>>(&v)) {
    if (contains_waveform(c->get().head)) return true;
    for (const auto& o : c->get().tail) {
      if (contains_waveform(o.operand)) return true;
    }
  }
  return false;
}

WaveformPtr Loader::eval_waveform(const ast::Operand& op, Scope* scope, const Expected& level,
                                  const std::string& owner) {
  if (!contains_waveform(op)) {
    auto q = eval_checked(op, scope, level, owner);
    return q ? make_constant(q->value) : nullptr;
  }
  const auto& v = op.get();
  if (auto* c = boost::get<x3::forward_ast<ast::Call>>(&v)) {
    return eval_waveform_call(c->get(), scope, level, owner);
  }
  if (auto* g = boost::get<x3::forward_ast<ast::Group>>(&v)) {
    if (g->get().items.size() != 1) {
      error(g->get(), "a list (a, b, ...) is not a waveform");
      return nullptr;
    }
    return eval_waveform(g->get().items[0], scope, level, owner);
  }
  if (auto* u = boost::get<x3::forward_ast<ast::Unary>>(&v)) {
    auto w = eval_waveform(u->get().operand, scope, level, owner);
    if (!w || u->get().op == '+') return w;
    return make_scaled(-1.0, w);
  }
  const ast::Chain& c = boost::get<x3::forward_ast<ast::Chain>>(v).get();
  if (c.tail.empty()) return eval_waveform(c.head, scope, level, owner);
  const char first_op = c.tail[0].op;
  if (first_op == '+' || first_op == '-') {
    std::vector<WaveformPtr> terms;
    auto head = eval_waveform(c.head, scope, level, owner);
    if (!head) return nullptr;
    terms.push_back(head);
    for (const ast::Operation& o : c.tail) {
      auto w = eval_waveform(o.operand, scope, level, owner);
      if (!w) return nullptr;
      terms.push_back(o.op == '-' ? make_scaled(-1.0, w) : w);
    }
    return make_sum(std::move(terms));
  }
  if (first_op == '^') {
    error(c.tail[0], "a waveform cannot be raised to a power", "use formula(...) for that");
    return nullptr;
  }
  // Products and quotients: exactly one waveform factor, the rest constants.
  const ast::Operand* wave = nullptr;
  double factor = 1;
  Unit factor_unit;
  bool first = true;
  auto absorb = [&](const ast::Operand& operand, char op) -> bool {
    if (contains_waveform(operand)) {
      if (wave || op == '/') {
        error(tagged(operand), op == '/' ? "cannot divide by a waveform"
                                         : "a product of two waveforms is not a waveform",
              "use formula(...) for that");
        return false;
      }
      wave = &operand;
      return true;
    }
    auto q = eval(operand, scope);
    if (!q) return false;
    if (op == '/') {
      if (q->value == 0) {
        error(tagged(operand), "division by zero");
        return false;
      }
      factor /= q->value;
    } else {
      factor *= q->value;
    }
    if (q->unit && !q->unit->dimensionless()) {
      factor_unit = q->unit;
      error(tagged(operand), "a waveform can only be scaled by a plain number, not by a value in " +
                                 unit_text(q->unit),
            "give the waveform's levels their unit instead");
      return false;
    }
    return true;
  };
  if (!absorb(c.head, '*')) return nullptr;
  first = false;
  for (const ast::Operation& o : c.tail) {
    if (!absorb(o.operand, o.op)) return nullptr;
  }
  (void)first;
  auto w = eval_waveform(*wave, scope, level, owner);
  if (!w) return nullptr;
  return make_scaled(factor, w);
}

namespace {
enum class ArgKind { Level, Time, Frequency, Plain, Count };
struct WaveArg {
  const char* name;
  ArgKind kind;
  std::optional<double> fallback;  // nullopt: required (or special)
};
}  // namespace

WaveformPtr Loader::eval_waveform_call(const ast::Call& call, Scope* scope, const Expected& level,
                                       const std::string& owner) {
  const std::string& f = call.function;
  const std::string who = owner + ": " + f + "()";
  if (f == "formula") {
    if (call.args.size() != 1 || call.args[0].key) {
      error(call, "formula() takes one expression in t", "e.g. formula(5*(1-exp(-t/2u)))");
      return nullptr;
    }
    Unit unit;
    auto tree = compile_formula(call.args[0].value, scope, unit);
    if (!tree) return nullptr;
    if (level.dim && unit && *unit != *level.dim) {
      error(call.args[0], who + " is in " + unit_text(unit) + ", but " + level.what + " is in " +
                              unit_text(*level.dim));
      return nullptr;
    }
    auto shared = std::make_shared<FormulaNode>(std::move(*tree));
    return make_formula([shared](double t) { return evaluate_formula(*shared, t); },
                        text_of(call.args[0].value));
  }
  if (f == "points") {
    std::vector<std::pair<double, double>> pts;
    const ast::Tagged* previous = nullptr;
    for (const ast::Argument& a : call.args) {
      if (!a.second) {
        error(a, "points() takes pairs 'time value' separated by commas",
              "e.g. points(0 0, 1m 5V, 2m 5V)");
        return nullptr;
      }
      auto t = eval_checked(a.value, scope, expect_dim(Dimension::second(), "a time"),
                            who + " time");
      auto y = eval_checked(*a.second, scope, level, who + " value");
      if (!t || !y) return nullptr;
      if (!pts.empty() && !(t->value > pts.back().first)) {
        error(tagged(a.value), "points() times must increase strictly: " +
                                   format_si(t->value, "s") + " comes after " +
                                   format_si(pts.back().first, "s"),
              previous ? "the previous time is '" + text_of(*previous) + "'" : "");
        return nullptr;
      }
      previous = &tagged(a.value);
      pts.emplace_back(t->value, y->value);
    }
    if (pts.empty()) {
      error(call, "points() needs at least one pair 'time value'");
      return nullptr;
    }
    return make_points(std::move(pts));
  }

  std::vector<WaveArg> spec;
  if (f == "step") {
    spec = {{"from", ArgKind::Level, 0.0}, {"to", ArgKind::Level, 1.0},
            {"at", ArgKind::Time, 0.0}, {"rise", ArgKind::Time, 0.0}};
  } else if (f == "pulse") {
    spec = {{"low", ArgKind::Level, 0.0},     {"high", ArgKind::Level, 1.0},
            {"period", ArgKind::Time, {}},    {"freq", ArgKind::Frequency, {}},
            {"width", ArgKind::Time, {}},     {"duty", ArgKind::Plain, {}},
            {"rise", ArgKind::Time, 0.0},     {"fall", ArgKind::Time, 0.0},
            {"start", ArgKind::Time, 0.0},    {"count", ArgKind::Count, {}}};
  } else if (f == "sine") {
    spec = {{"freq", ArgKind::Frequency, {}}, {"amp", ArgKind::Level, 1.0},
            {"mean", ArgKind::Level, 0.0},    {"phase", ArgKind::Plain, 0.0},
            {"start", ArgKind::Time, 0.0},    {"tau", ArgKind::Time, {}}};
  } else if (f == "approach") {
    spec = {{"to", ArgKind::Level, {}}, {"tau", ArgKind::Time, {}},
            {"from", ArgKind::Level, 0.0}, {"at", ArgKind::Time, 0.0}};
  } else if (f == "samples") {
    spec = {{"time", ArgKind::Count, 1.0}, {"value", ArgKind::Count, 2.0},
            {"scale", ArgKind::Plain, 1.0}};
  }
  std::vector<std::string> valid;
  for (const WaveArg& a : spec) valid.push_back(a.name);

  std::map<std::string, Quantity> given;
  std::map<std::string, const ast::Argument*> given_arg;
  std::map<std::string, std::string> column_names;  // samples: header names
  const ast::String* file = nullptr;
  bool ok = true;
  for (const ast::Argument& a : call.args) {
    if (!a.key) {
      if (f == "samples" && !file && as_string(a.value)) {
        file = as_string(a.value);
        continue;
      }
      error(a, f + "() takes named arguments: " + join(valid, "=, ") + "=",
            f == "samples" ? "the file name comes first, in double quotes" : "");
      ok = false;
      continue;
    }
    auto it = std::find_if(spec.begin(), spec.end(),
                           [&](const WaveArg& w) { return a.key->text == w.name; });
    if (it == spec.end()) {
      std::string near = suggest(a.key->text, valid);
      error(ast::Tagged{a.first, a.first + a.key->text.size()},
            "unknown argument '" + a.key->text + "' of " + f + "(); valid: " + join(valid, ", "),
            near.empty() ? "" : "did you mean '" + near + "'?");
      ok = false;
      continue;
    }
    if (given_arg.count(a.key->text)) {
      error(a, "argument '" + a.key->text + "' is given twice");
      ok = false;
      continue;
    }
    given_arg[a.key->text] = &a;
    if (f == "samples" && (it->kind == ArgKind::Count)) {
      if (const ast::String* s = as_string(a.value)) {
        column_names[a.key->text] = s->text;
        continue;
      }
      if (const ast::Name* n = as_name(a.value); n && !(scope && scope->find(n->text))) {
        column_names[a.key->text] = n->text;
        continue;
      }
    }
    Expected e;
    switch (it->kind) {
      case ArgKind::Level: e = level; break;
      case ArgKind::Time: e = expect_dim(Dimension::second(), "a time"); break;
      case ArgKind::Frequency: e = expect_dim(Dimension::hertz(), "a frequency"); break;
      case ArgKind::Plain:
      case ArgKind::Count: e = expect_dim(Dimension::none(), "a plain number"); break;
    }
    auto q = eval_checked(a.value, scope, e, who + " argument " + a.key->text);
    if (!q) {
      ok = false;
      continue;
    }
    if (it->kind == ArgKind::Count && (!is_whole(q->value) || q->value < 1)) {
      error(tagged(a.value),
            who + " argument " + a.key->text + " must be a whole number >= 1");
      ok = false;
      continue;
    }
    given[a.key->text] = *q;
  }
  if (!ok) return nullptr;
  auto value = [&](const char* name) -> std::optional<double> {
    auto it = given.find(name);
    if (it != given.end()) return it->second.value;
    for (const WaveArg& a : spec) {
      if (std::string(a.name) == name) return a.fallback;
    }
    return std::nullopt;
  };
  auto missing = [&](const std::string& what, const std::string& hint = {}) {
    error(call, f + "() needs " + what, hint);
    return nullptr;
  };
  auto bad = [&](const char* arg, const std::string& message) {
    auto it = given_arg.find(arg);
    error(it != given_arg.end() ? static_cast<const ast::Tagged&>(*it->second)
                                : static_cast<const ast::Tagged&>(call),
          message);
    return nullptr;
  };

  if (f == "step") {
    if (*value("rise") < 0) return bad("rise", "step() rise must not be negative");
    return make_step(*value("from"), *value("to"), *value("at"), *value("rise"));
  }
  if (f == "pulse") {
    PulseSpec p;
    p.low = *value("low");
    p.high = *value("high");
    const bool has_period = given.count("period"), has_freq = given.count("freq");
    const bool has_width = given.count("width"), has_duty = given.count("duty");
    if (has_period == has_freq) {
      return has_period ? bad("freq", "pulse() takes period= or freq=, not both")
                        : missing("period= or freq= (exactly one)", "e.g. pulse(high=5V, freq=100k, duty=50%)");
    }
    if (has_width == has_duty) {
      return has_width ? bad("duty", "pulse() takes width= or duty=, not both")
                       : missing("width= or duty= (exactly one)", "e.g. pulse(high=5V, period=10u, width=2u)");
    }
    if (has_freq && !(*value("freq") > 0)) return bad("freq", "pulse() freq must be > 0");
    p.period = has_period ? *value("period") : 1.0 / *value("freq");
    if (!(p.period > 0) || !std::isfinite(p.period))
      return bad(has_period ? "period" : "freq", "pulse() period must be > 0 and finite");
    if (has_duty && (*value("duty") < 0 || *value("duty") > 1)) {
      return bad("duty", "pulse() duty must be between 0 and 100%");
    }
    p.width = has_width ? *value("width") : *value("duty") * p.period;
    p.rise = *value("rise");
    p.fall = *value("fall");
    p.start = *value("start");
    if (p.width < 0) return bad("width", "pulse() width must not be negative");
    if (p.rise < 0) return bad("rise", "pulse() rise must not be negative");
    if (p.fall < 0) return bad("fall", "pulse() fall must not be negative");
    if (p.rise + p.width + p.fall > p.period * (1 + 1e-12)) {
      error(call, "pulse(): rise + width + fall (" + format_si(p.rise + p.width + p.fall, "s") +
                      ") does not fit in the period (" + format_si(p.period, "s") + ")");
      return nullptr;
    }
    if (given.count("count")) p.count = static_cast<long>(given["count"].value);
    return make_pulse(p);
  }
  if (f == "sine") {
    if (!given.count("freq")) return missing("freq= (required)", "e.g. sine(freq=50Hz, amp=325V)");
    if (!(*value("freq") > 0)) return bad("freq", "sine() freq must be > 0");
    double tau = std::numeric_limits<double>::infinity();
    if (given.count("tau")) {
      tau = given["tau"].value;
      if (!(tau > 0)) return bad("tau", "sine() tau must be > 0 (leave it out for no decay)");
    }
    return make_sine(*value("freq"), *value("amp"), *value("mean"), *value("phase"),
                     *value("start"), tau);
  }
  if (f == "approach") {
    if (!given.count("to")) return missing("to= (required)", "e.g. approach(to=12V, tau=1m)");
    if (!given.count("tau")) return missing("tau= (required)", "e.g. approach(to=12V, tau=1m)");
    if (!(*value("tau") > 0)) return bad("tau", "approach() tau must be > 0");
    return make_approach(*value("to"), *value("tau"), *value("from"), *value("at"));
  }
  if (f == "samples") {
    if (!file) return missing("a file name first, in double quotes", "samples(\"scope.csv\", time=1, value=2)");
    auto column = [&](const char* key) -> CsvColumn {
      auto n = column_names.find(key);
      if (n != column_names.end()) return CsvColumn{n->second};
      return CsvColumn{static_cast<int>(*value(key))};
    };
    const SourceFile* src = file_of(file->first);
    fs::path path = fs::path(file->text);
    if (path.is_relative() && src) path = fs::path(src->directory) / path;
    Diagnostics csv;
    auto pts = read_samples(path.string(), column("time"), column("value"), *value("scale"), csv,
                            file->text);
    for (Diagnostic& d : csv) {
      if (d.severity == Severity::Error) {
        // Show the CSV problem at the samples() call, naming the file and row.
        std::string message = d.message;
        if (d.where.line > 0) message = d.where.file + ":" + std::to_string(d.where.line) + ": " + message;
        error(*file, message, d.hint);
      }
    }
    if (!pts) return nullptr;
    if (pts->empty()) {
      error(*file, "samples(): the file has no data rows");
      return nullptr;
    }
    return make_samples(std::move(*pts), file->text);
  }
  std::vector<std::string> names = {"step", "pulse", "sine", "approach", "points", "samples", "formula"};
  error(call, "unknown waveform '" + f + "'", "waveforms: " + join(names, " "));
  return nullptr;
}

// --- Elaboration --------------------------------------------------------------------

bool Loader::valid_parameter_name(const ast::Name& name) {
  if (reserved_words().count(name.text)) {
    error(name, "'" + name.text + "' is a reserved word and cannot name a parameter",
          "choose another name, e.g. '" + name.text + "_value'");
    return false;
  }
  if (is_iec_code(name.text)) {
    LiteralError ignored;
    auto code = decode_number("0" + name.text, ignored);
    error(name, "'" + name.text + "' is an IEC 60062 value code (" +
                    format_si(code ? code->value : 0.0, "") + "), so it cannot name a parameter",
          "where a value is expected '" + name.text +
              "' is always a number; choose another name, e.g. '" + name.text + "_value'");
    return false;
  }
  return true;
}

void Loader::register_parameter(const Stmt& stmt, const ast::ParameterLine& line, Scope& scope,
                                const std::string& prefix) {
  (void)stmt;
  if (!valid_parameter_name(line.name)) return;
  auto it = scope.params.find(line.name.text);
  if (it != scope.params.end()) {
    error(line.name, "parameter '" + line.name.text + "' is defined twice",
          it->second->name_token ? "first defined at line " +
                                       std::to_string(where(*it->second->name_token).line)
                                 : "");
    return;
  }
  param_store_.emplace_back();
  ParamDef& p = param_store_.back();
  p.name = line.name.text;
  p.full_name = prefix + line.name.text;
  p.expr = &line.value;
  p.name_token = &line.name;
  p.eval_scope = &scope;
  scope.params[p.name] = &p;
  if (&scope == &global_) global_order_.push_back(&p);
}

int Loader::node(const ast::Name& name, Context& ctx) {
  std::string full;
  if (name.text == "gnd") return kGround;
  if (ctx.ports) {
    auto it = ctx.ports->find(name.text);
    if (it != ctx.ports->end()) return it->second;
  }
  full = ctx.prefix + name.text;
  auto it = node_index_.find(full);
  if (it != node_index_.end()) return it->second;
  Node n;
  n.name = full;
  n.where = where(name);
  circuit_.nodes.push_back(std::move(n));
  node_touches_.push_back(0);
  node_tokens_.push_back(&name);
  const int index = static_cast<int>(circuit_.nodes.size()) - 1;
  node_index_.emplace(full, index);
  return index;
}

std::optional<int> Loader::node_operand(const ast::Operand& op, Context& ctx,
                                        const std::string& owner) {
  const ast::Operand& u = unwrap_chain(op);
  if (const ast::Name* n = boost::get<ast::Name>(&u.get())) return node(*n, ctx);
  if (const ast::Number* n = boost::get<ast::Number>(&u.get())) {
    if (n->text == "0") {
      error(*n, owner + ": the ground node is written 'gnd', not 0", "write gnd");
    } else {
      error(*n, owner + ": expected a node name, found the number '" + n->text + "'",
            "node names start with a letter or '_'");
    }
    return std::nullopt;
  }
  error(tagged(op), owner + ": expected a node name, found '" + text_of(op) + "'");
  return std::nullopt;
}

bool Loader::claim_name(const std::string& full, const ast::Tagged& token) {
  auto [it, inserted] = names_.emplace(full, &token);
  if (!inserted) {
    error(token, "the name '" + full + "' is already used",
          "first used at line " + std::to_string(where(*it->second).line) +
              "; every element, coupling and instance needs its own name");
    return false;
  }
  return true;
}

int Loader::add_element(Element e) {
  for (int n : {e.a, e.b}) {
    if (n > 0) ++node_touches_[n];
  }
  circuit_.elements.push_back(std::move(e));
  return static_cast<int>(circuit_.elements.size()) - 1;
}

namespace {
// Attribute table: key -> expected dimension and description.
struct AttrSpec {
  const char* key;
  Dimension dim;
  const char* what;
};
}  // namespace

void Loader::elaborate_element(const Stmt& stmt, const ast::Command& cmd, Context& ctx) {
  const std::string& kind = cmd.keyword.text;
  std::vector<const ast::Operand*> pos;
  std::map<std::string, const ast::Attribute*> attrs;
  bool ok = true;
  for (const ast::Item& it : cmd.items) {
    if (auto* a = boost::get<ast::Attribute>(&it.get())) {
      if (attrs.count(a->key.text)) {
        error(a->key, "attribute '" + a->key.text + "' is given twice");
        ok = false;
      }
      attrs[a->key.text] = a;
    } else {
      pos.push_back(&boost::get<ast::Operand>(it.get()));
    }
  }
  ElementKind ek = ElementKind::Resistor;
  bool has_value = true;
  std::vector<AttrSpec> allowed;
  const char* value_what = "";
  Dimension value_dim;
  if (kind == "resistor") {
    ek = ElementKind::Resistor; value_dim = Dimension::ohm(); value_what = "a resistance";
    allowed = {{"tol", Dimension::none(), "a tolerance"}, {"rated", Dimension::watt(), "a resistor's rating"}};
  } else if (kind == "capacitor") {
    ek = ElementKind::Capacitor; value_dim = Dimension::farad(); value_what = "a capacitance";
    allowed = {{"v0", Dimension::volt(), "an initial voltage"}, {"esr", Dimension::ohm(), "a resistance"},
               {"esl", Dimension::henry(), "an inductance"}, {"tol", Dimension::none(), "a tolerance"},
               {"rated", Dimension::volt(), "a capacitor's rating"}};
  } else if (kind == "inductor") {
    ek = ElementKind::Inductor; value_dim = Dimension::henry(); value_what = "an inductance";
    allowed = {{"i0", Dimension::ampere(), "an initial current"}, {"dcr", Dimension::ohm(), "a resistance"},
               {"rpar", Dimension::ohm(), "a resistance"}, {"srf", Dimension::hertz(), "a frequency"},
               {"tol", Dimension::none(), "a tolerance"}, {"rated", Dimension::ampere(), "an inductor's rating"}};
  } else if (kind == "voltage") {
    ek = ElementKind::VoltageSource; value_dim = Dimension::volt(); value_what = "a voltage source's value";
  } else if (kind == "current") {
    ek = ElementKind::CurrentSource; value_dim = Dimension::ampere(); value_what = "a current source's value";
  } else if (kind == "vcvs" || kind == "vccs") {
    ek = kind == "vcvs" ? ElementKind::Vcvs : ElementKind::Vccs;
    has_value = false;
    allowed = {{"control", Dimension::none(), ""},
               {"gain", kind == "vcvs" ? Dimension::none() : Dimension::siemens(),
                kind == "vcvs" ? "a voltage gain" : "a transconductance"}};
  } else if (kind == "ccvs" || kind == "cccs") {
    ek = kind == "ccvs" ? ElementKind::Ccvs : ElementKind::Cccs;
    has_value = false;
    allowed = {{"through", Dimension::none(), ""},
               {"gain", kind == "ccvs" ? Dimension::ohm() : Dimension::none(),
                kind == "ccvs" ? "a transresistance" : "a current gain"}};
  } else if (kind == "switch") {
    ek = ElementKind::Switch;
    has_value = false;
    allowed = {{"gate", Dimension::none(), "a gate"}, {"closed", Dimension::ohm(), "a resistance"},
               {"open", Dimension::ohm(), "a resistance"}};
  }
  std::vector<std::string> valid;
  for (const AttrSpec& s : allowed) valid.push_back(s.key);

  const std::string form = kind == "resistor" ? "resistor NAME NODE NODE VALUE [tol=] [rated=]"
                         : kind == "capacitor" ? "capacitor NAME NODE NODE VALUE [v0=] [esr=] [esl=] [tol=] [rated=]"
                         : kind == "inductor" ? "inductor NAME NODE NODE VALUE [i0=] [dcr=] [rpar=] [srf=] [tol=] [rated=]"
                         : kind == "voltage" || kind == "current" ? kind + " NAME NODE NODE WAVEFORM"
                         : kind == "vcvs" || kind == "vccs" ? kind + " NAME NODE NODE control=(cp, cn) gain=G"
                         : kind == "ccvs" || kind == "cccs" ? kind + " NAME NODE NODE through=SOURCE gain=G"
                         : "switch NAME NODE NODE gate=WAVEFORM [closed=1m] [open=1G]";
  const ast::Name* name = pos.empty() ? nullptr : as_name(*pos[0]);
  if (!name || name->text.find('.') != std::string::npos) {
    error(pos.empty() ? static_cast<const ast::Tagged&>(cmd.keyword) : tagged(*pos[0]),
          kind + ": expected the element's name first", "form: " + form);
    return;
  }
  const std::string full = ctx.prefix + name->text;
  const std::string owner = kind + " " + full;
  const std::size_t wanted = has_value ? 4 : 3;
  if (pos.size() < wanted) {
    error(pos.size() < 3 ? static_cast<const ast::Tagged&>(cmd) : tagged(*pos.back()),
          owner + ": expected " + (pos.size() < 3 ? std::string("two nodes") : std::string("a value")) +
              (pos.size() < 3 && has_value ? " and a value" : ""),
          "form: " + form);
    return;
  }
  if (pos.size() > wanted) {
    const ast::Operand& extra = *pos[wanted];
    std::string hint = "form: " + form;
    if (boost::get<x3::forward_ast<ast::Unary>>(&extra.get())) {
      hint = "to subtract, put the whole expression in parentheses: (" +
             text_of(ast::Tagged{tagged(*pos[wanted - 1]).first, tagged(*pos.back()).last}) + ")";
    } else if (!has_value) {
      hint = kind == "switch" ? "the gate is given as gate=WAVEFORM" : "the gain is given as gain=VALUE";
    }
    error(extra, owner + ": unexpected value '" + text_of(extra) + "'", hint);
    return;
  }
  for (const auto& [key, attr] : attrs) {
    if (std::find(valid.begin(), valid.end(), key) == valid.end()) {
      std::string near = suggest(key, valid);
      error(attr->key, owner + ": unknown attribute '" + key + "'" +
                           (valid.empty() ? std::string(" (") + kind + " takes none)"
                                          : "; valid: " + join(valid, ", ")),
            near.empty() ? "" : "did you mean '" + near + "'?");
      ok = false;
    }
  }
  auto na = node_operand(*pos[1], ctx, owner);
  auto nb = node_operand(*pos[2], ctx, owner);
  if (!na || !nb) ok = false;
  if (!claim_name(full, *name)) ok = false;

  auto attr_value = [&](const char* key) -> std::optional<Quantity> {
    auto it = attrs.find(key);
    if (it == attrs.end()) return std::nullopt;
    auto spec = std::find_if(allowed.begin(), allowed.end(),
                             [&](const AttrSpec& a) { return std::string(a.key) == key; });
    // An attribute this kind does not take was already reported above.
    if (spec == allowed.end()) return std::nullopt;
    const AttrSpec& s = *spec;
    auto q = eval_checked(it->second->value, ctx.scope, expect_dim(s.dim, s.what),
                          owner + " " + key);
    if (!q) ok = false;
    return q;
  };
  auto attr_positive = [&](const char* key, bool allow_zero) -> std::optional<double> {
    auto q = attr_value(key);
    if (!q) return std::nullopt;
    if (q->value < 0 || (!allow_zero && q->value == 0)) {
      error(tagged(attrs[key]->value),
            owner + ": " + key + " must be " + (allow_zero ? ">= 0" : "> 0") + " (not " +
                format_si(q->value, unit_symbol(q->unit.value_or(Dimension::none()))) + ")");
      ok = false;
      return std::nullopt;
    }
    return q->value;
  };

  Element main;
  main.kind = ek;
  main.name = full;
  main.where = where(stmt);
  Part part;
  part.name = full;
  part.kind = ek;
  part.where = main.where;
  if (na) main.a = part.a = *na;
  if (nb) main.b = part.b = *nb;

  std::optional<double> tol, rated;
  if (attrs.count("tol")) {
    auto q = attr_value("tol");
    if (q) {
      if (q->value < 0 || q->value >= 1) {
        error(tagged(attrs["tol"]->value), owner + ": tol must be between 0 and 100% (not " +
                                               format_si(q->value * 100, "%") + ")");
        ok = false;
      } else {
        tol = q->value;
      }
    }
  }
  if (attrs.count("rated")) rated = attr_positive("rated", false);
  part.tol = tol;
  part.rated = rated;

  const ast::Operand* value_op = has_value ? pos[3] : nullptr;
  std::optional<Quantity> value;
  if (ek == ElementKind::Resistor || ek == ElementKind::Capacitor || ek == ElementKind::Inductor) {
    if (contains_waveform(*value_op)) {
      error(tagged(*value_op), owner + ": a " + kind + "'s value is a constant, not a waveform",
            "use a switch for a resistance that changes");
      return;
    }
    value = eval_checked(*value_op, ctx.scope, expect_dim(value_dim, value_what), owner + " value");
    if (!value) return;
    main.value = value->value;
    const std::string sym = unit_symbol(value_dim);
    if (ek == ElementKind::Resistor) {
      if (main.value == 0) {
        error(tagged(*value_op), owner + ": a resistance of 0 is not allowed",
              "a 0 Ohm resistor is a wire: join the two nodes (give them one name) instead");
        return;
      }
      if (main.value < 0) {
        warning(tagged(*value_op), owner + ": negative resistance " + format_si(main.value, sym) +
                                       " (allowed: an active or constant-power load model)");
      }
      // Plausibility bounds (NETLIST.md section 2): below 1 uOhm or above 1 TOhm.
      constexpr double kSmallestResistance = 1e-6, kLargestResistance = 1e12;
      const double r = std::fabs(main.value);
      if (r < kSmallestResistance || r > kLargestResistance) {
        warning(tagged(*value_op), owner + " = " + format_si(main.value, sym) +
                                       " is implausible for a resistor (outside 1 uOhm .. 1 TOhm)",
                "a forgotten or wrong prefix? (m is milli, M is mega)");
      }
    } else {
      if (!(main.value > 0)) {
        error(tagged(*value_op), owner + ": the value must be > 0 (not " + format_si(main.value, sym) + ")");
        return;
      }
      // Plausibility bounds (NETLIST.md section 2): C above 1 F, L above 10 H.
      constexpr double kLargestCapacitance = 1.0, kLargestInductance = 10.0;
      if (ek == ElementKind::Capacitor && main.value > kLargestCapacitance) {
        warning(tagged(*value_op), owner + " = " + format_si(main.value, sym) +
                                       " is implausibly large for a capacitor (above 1 F)",
                "a forgotten prefix? (u is micro, m is milli)");
      }
      if (ek == ElementKind::Inductor && main.value > kLargestInductance) {
        warning(tagged(*value_op), owner + " = " + format_si(main.value, sym) +
                                       " is implausibly large for an inductor (above 10 H)",
                "a forgotten prefix? (u is micro, m is milli)");
      }
    }
  } else if (ek == ElementKind::VoltageSource || ek == ElementKind::CurrentSource) {
    main.waveform = eval_waveform(*value_op, ctx.scope, expect_dim(value_dim, value_what), owner);
    if (!main.waveform) return;
  }

  // Controlled sources and switches.
  if (ek == ElementKind::Vcvs || ek == ElementKind::Vccs || ek == ElementKind::Ccvs ||
      ek == ElementKind::Cccs) {
    if (!attrs.count("gain")) {
      error(cmd.keyword, owner + ": gain= is required", "form: " + form);
      return;
    }
    auto g = attr_value("gain");
    if (!g) return;
    main.value = g->value;
  }
  if (ek == ElementKind::Vcvs || ek == ElementKind::Vccs) {
    const ast::Group* control = attrs.count("control") ? as_group(attrs["control"]->value) : nullptr;
    if (!control || control->items.size() != 2) {
      error(attrs.count("control") ? tagged(attrs["control"]->value)
                                   : static_cast<const ast::Tagged&>(cmd.keyword),
            owner + ": control=(cp, cn) with two nodes is required", "form: " + form);
      return;
    }
    auto cp = node_operand(control->items[0], ctx, owner);
    auto cn = node_operand(control->items[1], ctx, owner);
    if (!cp || !cn) return;
    main.control_p = *cp;
    main.control_n = *cn;
    for (int n : {*cp, *cn}) {
      if (n > 0) ++node_touches_[n];
    }
  }
  const ast::Name* through = nullptr;
  if (ek == ElementKind::Ccvs || ek == ElementKind::Cccs) {
    through = attrs.count("through") ? as_name(attrs["through"]->value) : nullptr;
    if (!through) {
      error(attrs.count("through") ? tagged(attrs["through"]->value)
                                   : static_cast<const ast::Tagged&>(cmd.keyword),
            owner + ": through=NAME of a voltage source, inductor or vcvs/ccvs is required",
            "form: " + form);
      return;
    }
  }
  if (ek == ElementKind::Switch) {
    if (!attrs.count("gate")) {
      error(cmd.keyword, owner + ": gate=WAVEFORM is required",
            "e.g. gate=step(from=1, to=0, at=10u): closed while the gate is above 0.5");
      return;
    }
    main.waveform = eval_waveform(attrs["gate"]->value, ctx.scope,
                                  expect_dim(Dimension::none(), "a gate (a plain number)"),
                                  owner + " gate");
    if (!main.waveform) ok = false;
    if (attrs.count("closed")) {
      if (auto v = attr_positive("closed", false)) main.closed = *v;
    }
    if (attrs.count("open")) {
      if (auto v = attr_positive("open", false)) main.open = *v;
    }
    if (ok && main.closed >= main.open) {
      warning(cmd.keyword, owner + ": closed resistance " + format_si(main.closed, "Ohm") +
                               " is not below the open resistance " + format_si(main.open, "Ohm"));
    }
  }
  if (ek == ElementKind::Capacitor && attrs.count("v0")) {
    if (auto q = attr_value("v0")) main.v0 = q->value;
  }
  if (ek == ElementKind::Inductor && attrs.count("i0")) {
    if (auto q = attr_value("i0")) main.i0 = q->value;
  }
  std::optional<double> esr, esl, dcr, rpar, srf;
  if (attrs.count("esr")) esr = attr_positive("esr", true);
  if (attrs.count("esl")) esl = attr_positive("esl", true);
  if (attrs.count("dcr")) dcr = attr_positive("dcr", true);
  if (attrs.count("rpar")) rpar = attr_positive("rpar", false);
  if (attrs.count("srf")) srf = attr_positive("srf", false);
  if (!ok) return;

  if (main.a == main.b) {
    warning(*name, owner + ": both ends are on node '" + circuit_.nodes[main.a].name + "'",
            "the element is shorted out");
  }

  // Build the part: main element plus hidden series and parallel parts.
  const int part_index = static_cast<int>(circuit_.parts.size());
  main.part = part_index;
  auto hidden = [&](ElementKind k, const std::string& suffix, int a, int b, double v) {
    Element e;
    e.kind = k;
    e.name = full + "." + suffix;
    e.a = a;
    e.b = b;
    e.value = v;
    e.part = part_index;
    e.hidden = true;
    e.where = main.where;
    return e;
  };
  int hidden_nodes = 0;
  auto internal_node = [&]() {
    Node n;
    n.name = full + "#" + std::to_string(++hidden_nodes);
    n.hidden = true;
    n.where = main.where;
    circuit_.nodes.push_back(std::move(n));
    node_touches_.push_back(0);
    node_tokens_.push_back(nullptr);
    node_index_.emplace(circuit_.nodes.back().name, static_cast<int>(circuit_.nodes.size()) - 1);
    return static_cast<int>(circuit_.nodes.size()) - 1;
  };
  const int pa = main.a, pb = main.b;
  if (ek == ElementKind::Capacitor && ((esr && *esr > 0) || (esl && *esl > 0))) {
    // a -[esr]- C1#1 -[esl]- C1#2 -[C]- b; the chain's head carries X.i.
    std::vector<Element> chain;
    if (esr && *esr > 0) chain.push_back(hidden(ElementKind::Resistor, "esr", 0, 0, *esr));
    if (esl && *esl > 0) chain.push_back(hidden(ElementKind::Inductor, "esl", 0, 0, *esl));
    int at = pa;
    std::vector<int> indices;
    for (Element& e : chain) {
      e.a = at;
      e.b = internal_node();
      at = e.b;
      indices.push_back(add_element(std::move(e)));
    }
    main.a = at;
    const int m = add_element(std::move(main));
    part.main = m;
    part.elements = indices;
    part.elements.push_back(m);
    part.terminal = {indices.front()};
  } else if (ek == ElementKind::Inductor && ((dcr && *dcr > 0) || rpar || srf)) {
    // a -[L]- L1#1 -[dcr]- b, with rpar and the srf capacitance from a to b.
    const double inductance = main.value;
    int m;
    std::vector<int> extra;
    if (dcr && *dcr > 0) {
      main.b = internal_node();
      const int mid = main.b;
      m = add_element(std::move(main));
      extra.push_back(add_element(hidden(ElementKind::Resistor, "dcr", mid, pb, *dcr)));
    } else {
      m = add_element(std::move(main));
    }
    part.main = m;
    part.elements = {m};
    part.elements.insert(part.elements.end(), extra.begin(), extra.end());
    part.terminal = {m};
    if (rpar) {
      const int r = add_element(hidden(ElementKind::Resistor, "rpar", pa, pb, *rpar));
      part.elements.push_back(r);
      part.terminal.push_back(r);
    }
    if (srf) {
      // Self-resonance: C = 1 / ((2 pi f)^2 L), the capacitance that resonates
      // with L at f (Thomson's formula for an LC circuit).
      const double w = 2 * std::numbers::pi * *srf;
      const int c = add_element(hidden(ElementKind::Capacitor, "srf", pa, pb, 1.0 / (w * w * inductance)));
      part.elements.push_back(c);
      part.terminal.push_back(c);
    }
  } else {
    const int m = add_element(std::move(main));
    part.main = m;
    part.elements = {m};
    part.terminal = {m};
  }
  if (through) pending_through_.push_back({part.main, through->text, ctx.prefix, through});
  circuit_.parts.push_back(std::move(part));
  part_index_.emplace(full, part_index);
}

void Loader::elaborate_couple(const Stmt& stmt, const ast::Command& cmd, Context& ctx) {
  std::vector<const ast::Operand*> pos;
  std::map<std::string, const ast::Attribute*> attrs;
  for (const ast::Item& it : cmd.items) {
    if (auto* a = boost::get<ast::Attribute>(&it.get())) {
      if (a->key.text != "k") {
        error(a->key, "couple: unknown attribute '" + a->key.text + "'; valid: k", "couple T1 (Lp, Ls) k=0.98");
        return;
      }
      attrs[a->key.text] = a;
    } else {
      pos.push_back(&boost::get<ast::Operand>(it.get()));
    }
  }
  const ast::Name* name = pos.empty() ? nullptr : as_name(*pos[0]);
  const ast::Group* list = pos.size() == 2 ? as_group(*pos[1]) : nullptr;
  if (!name || !list || name->text.find('.') != std::string::npos) {
    error(cmd.keyword, "expected: couple NAME (L1, L2 [, L3 ...]) k=K", "couple T1 (Lp, Ls) k=0.98");
    return;
  }
  const std::string full = ctx.prefix + name->text;
  if (!claim_name(full, *name)) return;
  PendingCouple pc;
  pc.coupling.name = full;
  pc.coupling.where = where(stmt);
  pc.prefix = ctx.prefix;
  for (const ast::Operand& op : list->items) {
    const ast::Name* n = as_name(op);
    if (!n) {
      error(tagged(op), "couple " + full + ": expected an inductor's name");
      return;
    }
    pc.names.push_back(n);
  }
  if (pc.names.size() < 2) {
    error(*list, "couple " + full + ": needs at least two inductors");
    return;
  }
  if (!attrs.count("k")) {
    error(cmd.keyword, "couple " + full + ": k= is required (0 < |k| < 1)");
    return;
  }
  auto k = eval_checked(attrs["k"]->value, ctx.scope,
                        expect_dim(Dimension::none(), "a coupling factor"), "couple " + full + " k");
  if (!k) return;
  if (!(std::fabs(k->value) > 0 && std::fabs(k->value) < 1)) {
    error(tagged(attrs["k"]->value), "couple " + full + ": k must satisfy 0 < |k| < 1 (not " +
                                         format_si(k->value, "") + ")",
          "|k| = 1 is a perfect transformer, which has no inductance matrix inverse; use 0.999");
    return;
  }
  pc.coupling.k = k->value;
  pending_couples_.push_back(std::move(pc));
}

void Loader::elaborate_use(const Stmt& stmt, const ast::Command& cmd, Context& ctx) {
  (void)stmt;
  std::vector<const ast::Operand*> pos;
  std::vector<const ast::Attribute*> args;
  for (const ast::Item& it : cmd.items) {
    if (auto* a = boost::get<ast::Attribute>(&it.get())) args.push_back(a);
    else pos.push_back(&boost::get<ast::Operand>(it.get()));
  }
  const ast::Name* block = pos.size() > 0 ? as_name(*pos[0]) : nullptr;
  const ast::Name* inst = pos.size() > 1 ? as_name(*pos[1]) : nullptr;
  const ast::Group* nodes = pos.size() > 2 ? as_group(*pos[2]) : nullptr;
  if (!block || !inst || !nodes || pos.size() != 3 || inst->text.find('.') != std::string::npos) {
    std::string hint = "use BLOCK INSTANCE (node, node, ...) [param=value ...]";
    if (pos.size() == 2 && as_call(*pos[1])) hint = "put a space between the instance name and its node list";
    error(pos.size() > 3 ? tagged(*pos[3]) : static_cast<const ast::Tagged&>(cmd.keyword),
          "expected: use BLOCK INSTANCE (node, ...) [param=value ...]", hint);
    return;
  }
  auto found = parsed_->blocks.find(block->text);
  if (found == parsed_->blocks.end()) {
    std::vector<std::string> names;
    for (const auto& [k, v] : parsed_->blocks) names.push_back(k);
    std::string near = suggest(block->text, names);
    error(*block, "unknown block '" + block->text + "'",
          near.empty() ? (names.empty() ? "define it with block ... end" : "blocks: " + join(names, ", "))
                       : "did you mean '" + near + "'?");
    return;
  }
  const BlockDef& def = *found->second;
  if (std::find(ctx.block_stack.begin(), ctx.block_stack.end(), def.name) != ctx.block_stack.end()) {
    std::vector<std::string> chain = ctx.block_stack;
    chain.push_back(def.name);
    error(*block, "block '" + def.name + "' uses itself: " + join(chain, " -> "),
          "a block may not contain itself, directly or through other blocks");
    return;
  }
  const std::string full = ctx.prefix + inst->text;
  if (!claim_name(full, *inst)) return;
  if (nodes->items.size() != def.ports.size()) {
    error(*nodes, "block '" + def.name + "' has " + std::to_string(def.ports.size()) + " port" +
                      (def.ports.size() == 1 ? "" : "s") + " (" + join(def.ports, ", ") + "), not " +
                      std::to_string(nodes->items.size()));
    return;
  }
  std::unordered_map<std::string, int> ports;
  for (std::size_t k = 0; k < def.ports.size(); ++k) {
    auto n = node_operand(nodes->items[k], ctx, "use " + full);
    if (!n) return;
    ports[def.ports[k]] = *n;
  }
  // Instance scope: block parameters (use arguments, evaluated in the
  // caller's scope, or defaults, evaluated in the global scope), then the
  // body's own parameter lines. Its parent is the global scope: blocks see
  // globals, never the caller's locals.
  scopes_.emplace_back();
  Scope& scope = scopes_.back();
  scope.parent = &global_;
  scope.prefix = full + ".";
  std::vector<std::string> param_names;
  for (const ast::Attribute* d : def.defaults) param_names.push_back(d->key.text);
  std::map<std::string, const ast::Attribute*> given;
  bool ok = true;
  for (const ast::Attribute* a : args) {
    if (std::find(param_names.begin(), param_names.end(), a->key.text) == param_names.end()) {
      std::string near = suggest(a->key.text, param_names);
      error(a->key, "block '" + def.name + "' has no parameter '" + a->key.text + "'" +
                        (param_names.empty() ? "" : "; its parameters: " + join(param_names, ", ")),
            near.empty() ? "" : "did you mean '" + near + "'?");
      ok = false;
      continue;
    }
    if (given.count(a->key.text)) {
      error(a->key, "parameter '" + a->key.text + "' is given twice");
      ok = false;
    }
    given[a->key.text] = a;
  }
  if (!ok) return;
  std::vector<ParamDef*> instance_params;
  for (const ast::Attribute* d : def.defaults) {
    if (scope.params.count(d->key.text)) continue;  // reported at the block line
    param_store_.emplace_back();
    ParamDef& p = param_store_.back();
    p.name = d->key.text;
    p.full_name = full + "." + d->key.text;
    auto g = given.find(d->key.text);
    if (g != given.end()) {
      p.expr = &g->second->value;
      p.name_token = &g->second->key;
      p.eval_scope = ctx.scope;
    } else {
      p.expr = &d->value;
      p.name_token = &d->key;
      p.eval_scope = &global_;
    }
    scope.params[p.name] = &p;
    instance_params.push_back(&p);
  }
  for (const Stmt* s : def.body) {
    if (auto* line = boost::get<ast::ParameterLine>(&s->ast.get())) {
      if (scope.params.count(line->name.text) &&
          std::find(param_names.begin(), param_names.end(), line->name.text) != param_names.end()) {
        error(line->name, "'" + line->name.text + "' is already a parameter of block '" + def.name + "'");
        continue;
      }
      register_parameter(*s, *line, scope, scope.prefix);
      if (auto it = scope.params.find(line->name.text); it != scope.params.end()) {
        if (std::find(instance_params.begin(), instance_params.end(), it->second) == instance_params.end())
          instance_params.push_back(it->second);
      }
    }
  }
  Context inner;
  inner.scope = &scope;
  inner.prefix = full + ".";
  inner.ports = &ports;
  inner.block_stack = ctx.block_stack;
  inner.block_stack.push_back(def.name);
  for (const Stmt* s : def.body) elaborate_statement(*s, inner, false);
  for (ParamDef* p : instance_params) {
    if (auto q = eval_param(*p)) {
      Parameter out;
      out.name = p->full_name;
      out.value = q->value;
      out.unit = q->unit;
      out.text = text_of(*p->expr);
      out.where = where(*p->name_token);
      circuit_.parameters.push_back(std::move(out));
    }
  }
}

// --- Analyses -------------------------------------------------------------------------

namespace {
// Split a command's items into positional values and attributes, reporting
// positional values where only key=value is allowed.
struct Split {
  std::vector<const ast::Operand*> positional;
  std::map<std::string, const ast::Attribute*> attrs;
};
}  // namespace

void Loader::elaborate_title(const Stmt& stmt, const ast::Command& cmd) {
  const ast::String* s = nullptr;
  if (cmd.items.size() == 1) {
    if (auto* op = boost::get<ast::Operand>(&cmd.items[0].get())) s = as_string(*op);
  }
  if (!s) {
    error(cmd.keyword, "title needs one text in double quotes", "title \"Snubber test\"");
    return;
  }
  if (title_stmt_) {
    error(cmd.keyword, "a second title", "first title at line " + std::to_string(where(*title_stmt_).line));
    return;
  }
  title_stmt_ = &stmt;
  circuit_.title = s->text;
}

// key=value statements (transient, frequency, trials): check the keys.
static bool collect_attributes(const ast::Command& cmd, const std::vector<std::string>& valid,
                               std::map<std::string, const ast::Attribute*>& out,
                               const std::function<void(const ast::Tagged&, std::string, std::string)>& err) {
  bool ok = true;
  for (const ast::Item& it : cmd.items) {
    if (auto* a = boost::get<ast::Attribute>(&it.get())) {
      if (std::find(valid.begin(), valid.end(), a->key.text) == valid.end()) {
        std::string near = suggest(a->key.text, valid);
        err(a->key, cmd.keyword.text + ": unknown attribute '" + a->key.text + "'; valid: " + join(valid, ", "),
            near.empty() ? "" : "did you mean '" + near + "'?");
        ok = false;
      } else if (out.count(a->key.text)) {
        err(a->key, cmd.keyword.text + ": '" + a->key.text + "' is given twice", "");
        ok = false;
      } else {
        out[a->key.text] = a;
      }
    } else {
      const auto& op = boost::get<ast::Operand>(it.get());
      err(tagged(op), cmd.keyword.text + " takes key=value attributes: " + join(valid, "=, ") + "=", "");
      ok = false;
    }
  }
  return ok;
}

void Loader::elaborate_transient(const Stmt& stmt, const ast::Command& cmd) {
  std::map<std::string, const ast::Attribute*> a;
  auto err = [this](const ast::Tagged& t, std::string m, std::string h) { error(t, m, h); };
  if (!collect_attributes(cmd, {"until", "every", "initial"}, a, err)) return;
  if (transient_stmt_) {
    error(cmd.keyword, "a second transient statement",
          "first at line " + std::to_string(where(*transient_stmt_).line) + "; a file has one transient run");
    return;
  }
  transient_stmt_ = &stmt;
  if (!a.count("until")) {
    error(cmd.keyword, "transient: until=T is required", "transient until=2m every=200n");
    return;
  }
  TransientRequest t;
  t.where = where(stmt);
  auto until = eval_checked(a["until"]->value, &global_, expect_dim(Dimension::second(), "a time"),
                            "transient until");
  if (!until) return;
  if (!(until->value > 0)) {
    error(tagged(a["until"]->value), "transient: until must be > 0");
    return;
  }
  t.until = until->value;
  t.every = t.until / 1000;  // NETLIST.md: H defaults to T/1000
  if (a.count("every")) {
    auto every = eval_checked(a["every"]->value, &global_, expect_dim(Dimension::second(), "a time"),
                              "transient every");
    if (!every) return;
    if (!(every->value > 0) || every->value > t.until) {
      error(tagged(a["every"]->value), "transient: every must be > 0 and not above until (" +
                                           format_si(t.until, "s") + ")");
      return;
    }
    t.every = every->value;
    // N = round(T/H) when T/H is within 1e-9 (relative) of a whole number,
    // else floor(T/H) with a warning (NETLIST.md section 7).
    constexpr double kWholeTolerance = 1e-9;
    const double ratio = t.until / t.every;
    if (std::fabs(ratio - std::round(ratio)) > kWholeTolerance * ratio) {
      const double n = std::floor(ratio);
      warning(*a["every"], "transient: until/every = " + format_si(ratio, "") +
                               " is not a whole number; the output stops at " +
                               format_si(n * t.every, "s") + " (" + format_si(n, "") + " steps)",
              "choose every so that it divides until");
    }
  }
  if (a.count("initial")) {
    const ast::Name* n = as_name(a["initial"]->value);
    if (!n || (n->text != "dc" && n->text != "zero")) {
      error(tagged(a["initial"]->value), "transient: initial must be dc or zero");
      return;
    }
    t.initial_dc = n->text == "dc";
  }
  circuit_.transient = t;
}

void Loader::elaborate_frequency(const Stmt& stmt, const ast::Command& cmd) {
  std::map<std::string, const ast::Attribute*> a;
  auto err = [this](const ast::Tagged& t, std::string m, std::string h) { error(t, m, h); };
  if (!collect_attributes(cmd, {"from", "to", "per_decade", "input"}, a, err)) return;
  if (frequency_stmt_) {
    error(cmd.keyword, "a second frequency statement",
          "first at line " + std::to_string(where(*frequency_stmt_).line));
    return;
  }
  frequency_stmt_ = &stmt;
  for (const char* key : {"from", "to", "input"}) {
    if (!a.count(key)) {
      error(cmd.keyword, std::string("frequency: ") + key + "= is required",
            "frequency from=10Hz to=10MHz input=V1");
      return;
    }
  }
  FrequencyRequest f;
  f.where = where(stmt);
  auto from = eval_checked(a["from"]->value, &global_, expect_dim(Dimension::hertz(), "a frequency"), "frequency from");
  auto to = eval_checked(a["to"]->value, &global_, expect_dim(Dimension::hertz(), "a frequency"), "frequency to");
  if (!from || !to) return;
  if (!(from->value > 0) || !(to->value >= from->value)) {
    error(cmd.keyword, "frequency: needs 0 < from <= to (from = " + format_si(from->value, "Hz") +
                           ", to = " + format_si(to->value, "Hz") + ")");
    return;
  }
  f.from = from->value;
  f.to = to->value;
  if (a.count("per_decade")) {
    auto n = eval_count(a["per_decade"]->value, &global_, "frequency per_decade", 1);
    if (!n) return;
    f.per_decade = static_cast<int>(*n);
  }
  const ast::Name* input = as_name(a["input"]->value);
  if (!input) {
    error(tagged(a["input"]->value), "frequency: input= must name a voltage or current source");
    return;
  }
  f.input = input->text;
  frequency_input_ = input;
  circuit_.frequency = f;
}

void Loader::elaborate_trials(const Stmt& stmt, const ast::Command& cmd) {
  std::map<std::string, const ast::Attribute*> a;
  auto err = [this](const ast::Tagged& t, std::string m, std::string h) { error(t, m, h); };
  if (!collect_attributes(cmd, {"runs", "seed", "spread", "yield"}, a, err)) return;
  if (trials_stmt_) {
    error(cmd.keyword, "a second trials statement",
          "first at line " + std::to_string(where(*trials_stmt_).line));
    return;
  }
  trials_stmt_ = &stmt;
  if (!a.count("runs")) {
    error(cmd.keyword, "trials: runs=N is required", "trials runs=200 seed=1");
    return;
  }
  TrialsRequest t;
  t.where = where(stmt);
  auto runs = eval_count(a["runs"]->value, &global_, "trials runs", 1);
  if (!runs) return;
  t.runs = *runs;
  if (a.count("seed")) {
    auto seed = eval_count(a["seed"]->value, &global_, "trials seed", 0);
    if (!seed) return;
    t.seed = static_cast<unsigned long long>(*seed);
  }
  if (a.count("spread")) {
    const ast::Name* n = as_name(a["spread"]->value);
    if (!n || (n->text != "uniform" && n->text != "normal" && n->text != "corners")) {
      error(tagged(a["spread"]->value), "trials: spread must be uniform, normal or corners");
      return;
    }
    t.spread = n->text == "uniform" ? Spread::Uniform : n->text == "normal" ? Spread::Normal : Spread::Corners;
  }
  if (a.count("yield")) {
    auto y = eval_checked(a["yield"]->value, &global_, expect_dim(Dimension::none(), "a share"), "trials yield");
    if (!y) return;
    if (!(y->value > 0 && y->value <= 1)) {
      error(tagged(a["yield"]->value), "trials: yield must be above 0 and at most 100%");
      return;
    }
    t.yield = y->value;
  }
  circuit_.trials = t;
}

std::optional<std::vector<double>> Loader::sweep_values(const ast::Operand& list, Unit& unit) {
  std::vector<Quantity> items;
  auto merge_unit = [&](const Quantity& q, const ast::Tagged& where) {
    if (!q.unit) return true;
    if (unit && *unit != *q.unit) {
      error(where, "sweep values in " + unit_text(unit) + " and " + unit_text(q.unit),
            "all values of a sweep need the same unit");
      return false;
    }
    unit = q.unit;
    return true;
  };
  if (const ast::Group* g = as_group(list)) {
    std::vector<double> out;
    for (const ast::Operand& op : g->items) {
      auto q = eval(op, &global_);
      if (!q || !merge_unit(*q, tagged(op))) return std::nullopt;
      out.push_back(q->value);
    }
    return out;
  }
  const ast::Call* c = as_call(list);
  const std::string f = c ? c->function : "";
  const bool series = f == "e6" || f == "e12" || f == "e24" || f == "e96";
  if (!c || !(f == "linear" || f == "geometric" || series)) {
    error(tagged(list), "a sweep list is (v1, v2, ...), linear(a, b, n), geometric(a, b, n) or e6/e12/e24/e96(a, b)");
    return std::nullopt;
  }
  const std::size_t wanted = series ? 2 : 3;
  if (c->args.size() != wanted) {
    error(*c, f + "() takes " + std::to_string(wanted) + " arguments" +
                  (series ? " (low, high)" : " (from, to, count)"));
    return std::nullopt;
  }
  std::vector<double> v;
  for (std::size_t k = 0; k < wanted; ++k) {
    if (c->args[k].key) {
      error(c->args[k], f + "() takes positional arguments");
      return std::nullopt;
    }
    if (k == 2) {
      auto n = eval_count(c->args[k].value, &global_, f + "() count", 2);
      if (!n) return std::nullopt;
      v.push_back(static_cast<double>(*n));
    } else {
      auto q = eval(c->args[k].value, &global_);
      if (!q || !merge_unit(*q, tagged(c->args[k].value))) return std::nullopt;
      v.push_back(q->value);
    }
  }
  if (f == "linear") return linear_values(v[0], v[1], static_cast<int>(v[2]));
  if (f == "geometric") {
    if (v[0] == 0 || v[1] == 0 || (v[0] < 0) != (v[1] < 0)) {
      error(*c, "geometric() bounds must be non-zero and of the same sign");
      return std::nullopt;
    }
    return geometric_values(v[0], v[1], static_cast<int>(v[2]));
  }
  if (!(v[0] > 0) || !(v[1] >= v[0])) {
    error(*c, f + "() needs 0 < low <= high");
    return std::nullopt;
  }
  auto out = preferred_values(std::stoi(f.substr(1)), v[0], v[1]);
  if (out.empty()) {
    error(*c, f + "(): no value of the series lies between " + format_si(v[0], "") + " and " +
                  format_si(v[1], ""));
    return std::nullopt;
  }
  return out;
}

void Loader::elaborate_sweep(const Stmt& stmt, const ast::SweepLine& line) {
  for (const SweepRequest& s : circuit_.sweeps) {
    if (s.parameter == line.name.text) {
      error(line.name, "parameter '" + line.name.text + "' is swept twice");
      return;
    }
  }
  SweepRequest s;
  s.parameter = line.name.text;
  s.text = text_of(line.list);
  s.where = where(stmt);
  auto values = sweep_values(line.list, s.unit);
  if (!values) return;
  ParamDef* p = global_.find(line.name.text);
  if (p && p->state == ParamDef::State::Done && p->q.unit && s.unit && *p->q.unit != *s.unit) {
    error(tagged(line.list), "sweep " + s.parameter + ": values in " + unit_text(s.unit) +
                                 ", but the parameter is in " + unit_text(p->q.unit));
    return;
  }
  s.values = std::move(*values);
  circuit_.sweeps.push_back(std::move(s));
}

void Loader::elaborate_command(const Stmt& stmt, const ast::Command& cmd, Context& ctx,
                               bool top_level) {
  const std::string& k = cmd.keyword.text;
  static const std::set<std::string> element_kinds = {"resistor", "capacitor", "inductor", "voltage",
                                                      "current",  "vcvs",      "vccs",     "ccvs",
                                                      "cccs",     "switch"};
  if (element_kinds.count(k)) return elaborate_element(stmt, cmd, ctx);
  if (k == "couple") return elaborate_couple(stmt, cmd, ctx);
  if (k == "use") return elaborate_use(stmt, cmd, ctx);
  const bool analysis = k == "title" || k == "transient" || k == "frequency" || k == "modes" ||
                        k == "trials";
  if (analysis && !top_level) {
    error(cmd.keyword, "'" + k + "' is not allowed inside a block", "move it after the block's 'end'");
    return;
  }
  if (k == "title") return elaborate_title(stmt, cmd);
  if (k == "transient") return elaborate_transient(stmt, cmd);
  if (k == "frequency") return elaborate_frequency(stmt, cmd);
  if (k == "trials") return elaborate_trials(stmt, cmd);
  if (k == "modes") {
    if (!cmd.items.empty()) error(cmd, "modes takes no arguments");
    circuit_.modes = true;
    return;
  }
  if (k == "end") {
    error(cmd, "'end' takes nothing after it");
    return;
  }
  std::vector<std::string> words = statement_keywords();
  std::string near = suggest(k, words);
  std::string hint = near.empty() ? "statements start with a keyword (resistor, capacitor, ..., "
                                    "record, report, expect) or are NAME = EXPRESSION"
                                  : "did you mean '" + near + "'?";
  error(cmd.keyword, "unknown statement '" + k + "'", hint);
}

void Loader::elaborate_statement(const Stmt& stmt, Context& ctx, bool top_level) {
  const auto& v = stmt.ast.get();
  if (auto* cmd = boost::get<ast::Command>(&v)) return elaborate_command(stmt, *cmd, ctx, top_level);
  if (boost::get<ast::ParameterLine>(&v)) return;  // registered beforehand, evaluated lazily
  if (!top_level) {
    const ast::Tagged& kw = boost::get<ast::ReportLine>(&v)   ? boost::get<ast::ReportLine>(v).keyword
                          : boost::get<ast::SweepLine>(&v)    ? boost::get<ast::SweepLine>(v).keyword
                          : boost::get<ast::RecordLine>(&v)   ? boost::get<ast::RecordLine>(v).keyword
                                                              : boost::get<ast::ExpectLine>(v).keyword;
    error(kw, "'" + text_of(kw) + "' is not allowed inside a block",
          "move it after the block's 'end'; name the instance's parts with dots (SN1.R1)");
    return;
  }
  if (auto* s = boost::get<ast::SweepLine>(&v)) return elaborate_sweep(stmt, *s);
  // record, report, expect: resolved once every element exists.
}

// --- Signals and figures ------------------------------------------------------------

std::string Loader::suggest_signal(const std::string& name) const {
  const auto dot = name.rfind('.');
  if (dot != std::string::npos) {
    const std::string prefix = name.substr(0, dot), q = name.substr(dot + 1);
    std::vector<std::string> parts;
    for (const Part& p : circuit_.parts) parts.push_back(p.name);
    std::string near = suggest(prefix, parts);
    if (!near.empty()) return near + "." + q;
  }
  std::vector<std::string> nodes;
  for (const Node& n : circuit_.nodes) {
    if (!n.hidden) nodes.push_back(n.name);
  }
  std::string near = suggest(name, nodes);
  if (!near.empty()) return near;
  std::vector<std::string> parts;
  for (const Part& p : circuit_.parts) parts.push_back(p.name);
  near = suggest(name, parts);
  return near.empty() ? "" : near + ".v";
}

std::optional<SignalExpr> Loader::signal_name(const ast::Name& n, Unit& unit) {
  SignalExpr e;
  auto node = node_index_.find(n.text);
  if (node != node_index_.end() && !circuit_.nodes[node->second].hidden) {
    e.op = SignalExpr::Op::NodeVoltage;
    e.index = node->second;
    unit = Dimension::volt();
    return e;
  }
  if (n.text == "gnd") {
    e.op = SignalExpr::Op::NodeVoltage;
    e.index = kGround;
    unit = Dimension::volt();
    return e;
  }
  const auto dot = n.text.rfind('.');
  if (dot != std::string::npos) {
    const int part = find_part_named(n.text.substr(0, dot));
    if (part >= 0) {
      const std::string q = n.text.substr(dot + 1);
      const ElementKind kind = circuit_.parts[part].kind;
      e.op = SignalExpr::Op::PartQuantity;
      e.index = part;
      if (q == "v") { e.quantity = ringdown::Quantity::Voltage; unit = Dimension::volt(); return e; }
      if (q == "i") { e.quantity = ringdown::Quantity::Current; unit = Dimension::ampere(); return e; }
      if (q == "p") { e.quantity = ringdown::Quantity::Power; unit = Dimension::watt(); return e; }
      if (q == "vc" && kind == ElementKind::Capacitor) {
        e.quantity = ringdown::Quantity::CapacitanceVoltage; unit = Dimension::volt(); return e;
      }
      if (q == "il" && kind == ElementKind::Inductor) {
        e.quantity = ringdown::Quantity::InductanceCurrent; unit = Dimension::ampere(); return e;
      }
      std::string valid = kind == ElementKind::Capacitor ? "v, i, p, vc"
                        : kind == ElementKind::Inductor  ? "v, i, p, il" : "v, i, p";
      error(n, std::string(kind_name(kind)) + " " + circuit_.parts[part].name +
                   " has no quantity '" + q + "'; it has " + valid);
      return std::nullopt;
    }
  }
  if (find_part_named(n.text) >= 0) {
    error(n, "'" + n.text + "' is an element, not a signal",
          "write " + n.text + ".v, " + n.text + ".i or " + n.text + ".p");
    return std::nullopt;
  }
  if (ParamDef* p = global_.find(n.text)) {
    auto q = eval_param(*p);
    if (!q) return std::nullopt;
    e.op = SignalExpr::Op::Constant;
    e.constant = q->value;
    unit = q->unit;
    return e;
  }
  // An element whose own line failed was already reported there: a second
  // error for every reference to it would only be noise.
  if (dot != std::string::npos && errors_ > 0) {
    const std::string owner = n.text.substr(0, dot);
    bool coupling = false;
    for (const Coupling& c : circuit_.couplings) coupling = coupling || c.name == owner;
    if (!coupling && names_.count(owner) > 0) return std::nullopt;
  }
  std::string near = suggest_signal(n.text);
  error(n, "unknown node or element '" + n.text + "'",
        near.empty() ? "a signal is a node name, X.v, X.i, X.p, C.vc or L.il"
                     : "did you mean '" + near + "'?");
  return std::nullopt;
}

std::optional<SignalExpr> Loader::signal_expr(const ast::Operand& op, Unit& unit) {
  const auto& v = op.get();
  if (auto* n = boost::get<ast::Name>(&v)) return signal_name(*n, unit);
  if (auto* n = boost::get<ast::Number>(&v)) {
    auto q = eval_number(*n);
    if (!q) return std::nullopt;
    SignalExpr e;
    e.constant = q->value;
    unit = q->unit;
    return e;
  }
  if (auto* g = boost::get<x3::forward_ast<ast::Group>>(&v)) {
    if (g->get().items.size() != 1) {
      error(g->get(), "a list is not a signal");
      return std::nullopt;
    }
    return signal_expr(g->get().items[0], unit);
  }
  if (auto* u = boost::get<x3::forward_ast<ast::Unary>>(&v)) {
    auto inner = signal_expr(u->get().operand, unit);
    if (!inner || u->get().op == '+') return inner;
    SignalExpr e;
    e.op = SignalExpr::Op::Neg;
    e.args.push_back(std::move(*inner));
    return e;
  }
  if (auto* cp = boost::get<x3::forward_ast<ast::Chain>>(&v)) {
    const ast::Chain& c = cp->get();
    auto acc = signal_expr(c.head, unit);
    if (!acc) return std::nullopt;
    for (const ast::Operation& o : c.tail) {
      Unit b_unit;
      auto b = signal_expr(o.operand, b_unit);
      if (!b) return std::nullopt;
      std::optional<Quantity> r;
      if (o.op == '^') {
        if (b->op != SignalExpr::Op::Constant) {
          error(tagged(o.operand), "the exponent of a signal must be a constant");
          return std::nullopt;
        }
        r = power(Quantity{1, unit}, Quantity{b->constant, b_unit}, o);
      } else {
        r = combine(o.op, Quantity{1, unit}, Quantity{1, b_unit}, o, tagged(o.operand));
      }
      if (!r) return std::nullopt;
      unit = r->unit;
      SignalExpr e;
      e.op = o.op == '+' ? SignalExpr::Op::Add : o.op == '-' ? SignalExpr::Op::Sub
           : o.op == '*' ? SignalExpr::Op::Mul : o.op == '/' ? SignalExpr::Op::Div
                         : SignalExpr::Op::Pow;
      e.args.push_back(std::move(*acc));
      e.args.push_back(std::move(*b));
      acc = std::move(e);
    }
    return acc;
  }
  error(tagged(op), "a signal is a node, X.v, X.i, X.p, C.vc, L.il or an arithmetic combination of them",
        "functions are not allowed in signals");
  return std::nullopt;
}

std::optional<Signal> Loader::make_signal(const ast::Operand& op, const std::string& name) {
  Signal s;
  s.name = name.empty() ? text_of(op) : name;
  s.where = where(tagged(op));
  auto e = signal_expr(op, s.unit);
  if (!e) return std::nullopt;
  s.expr = std::move(*e);
  return s;
}

namespace {
struct FigureSpec {
  enum class Unit { Signal, SignalTimesSecond, SignalPerSecond, Second, Hertz, None, Joule, Watt } unit;
  std::vector<std::string> named;  // besides from, to
  int positional;                  // 1 or 2
  const char* second;              // name of the 2nd positional ("t", "level") or ""
};
const std::map<std::string, FigureSpec>& figure_table() {
  using U = FigureSpec::Unit;
  static const std::map<std::string, FigureSpec> table = {
      {"max", {U::Signal, {}, 1, ""}},          {"min", {U::Signal, {}, 1, ""}},
      {"peak", {U::Signal, {}, 1, ""}},         {"pp", {U::Signal, {}, 1, ""}},
      {"tmax", {U::Second, {}, 1, ""}},         {"tmin", {U::Second, {}, 1, ""}},
      {"final", {U::Signal, {}, 1, ""}},        {"at", {U::Signal, {"t"}, 2, "t"}},
      {"mean", {U::Signal, {}, 1, ""}},         {"rms", {U::Signal, {}, 1, ""}},
      {"integral", {U::SignalTimesSecond, {}, 1, ""}},
      {"slope", {U::SignalPerSecond, {}, 1, ""}},
      {"energy", {U::Joule, {}, 1, ""}},        {"power", {U::Watt, {}, 1, ""}},
      {"overshoot", {U::None, {}, 1, ""}},      {"undershoot", {U::None, {}, 1, ""}},
      {"rise", {U::Second, {"lo", "hi"}, 1, ""}},
      {"settle", {U::Second, {"band"}, 1, ""}},
      {"ringfreq", {U::Hertz, {}, 1, ""}},      {"damping", {U::None, {}, 1, ""}},
      {"when", {U::Second, {"level", "nth", "edge"}, 2, "level"}}};
  return table;
}
}  // namespace

std::optional<FigureCall> Loader::make_figure(const ast::Operand& op) {
  const ast::Call* c = as_call(op);
  std::vector<std::string> names;
  for (const auto& [k, v] : figure_table()) names.push_back(k);
  if (!c) {
    error(tagged(op), "expected a figure such as max(drain) or energy(R1)",
          "figures: " + join(names, " "));
    return std::nullopt;
  }
  auto spec_it = figure_table().find(c->function);
  if (spec_it == figure_table().end()) {
    std::string near = suggest(c->function, names);
    error(ast::Tagged{c->first, c->first + c->function.size()}, "unknown figure '" + c->function + "'",
          near.empty() ? "figures: " + join(names, " ") : "did you mean '" + near + "'?");
    return std::nullopt;
  }
  const FigureSpec& spec = spec_it->second;
  FigureCall f;
  f.function = c->function;
  f.text = text_of(*c);
  f.where = where(*c);
  std::vector<const ast::Argument*> positional;
  std::map<std::string, const ast::Argument*> named;
  std::vector<std::string> valid = {"from", "to"};
  valid.insert(valid.end(), spec.named.begin(), spec.named.end());
  bool ok = true;
  for (const ast::Argument& a : c->args) {
    if (!a.key) {
      positional.push_back(&a);
      continue;
    }
    if (std::find(valid.begin(), valid.end(), a.key->text) == valid.end()) {
      std::string near = suggest(a.key->text, valid);
      error(ast::Tagged{a.first, a.first + a.key->text.size()},
            "unknown argument '" + a.key->text + "' of " + c->function + "(); valid: " + join(valid, ", "),
            near.empty() ? "" : "did you mean '" + near + "'?");
      ok = false;
      continue;
    }
    if (named.count(a.key->text)) {
      error(a, "argument '" + a.key->text + "' is given twice");
      ok = false;
    }
    named[a.key->text] = &a;
  }
  if (!ok) return std::nullopt;
  if (positional.empty()) {
    error(*c, c->function + "() needs a " +
                  std::string(c->function == "energy" || c->function == "power" ? "part" : "signal"));
    return std::nullopt;
  }
  // A second positional argument is `t` of at() or `level` of when().
  if (positional.size() == 2 && spec.positional == 2) {
    if (named.count(spec.second)) {
      error(*positional[1], std::string(spec.second) + " is given twice");
      return std::nullopt;
    }
    named[spec.second] = positional[1];
    positional.pop_back();
  }
  if (positional.size() > 1) {
    error(*positional[1], c->function + "() takes one " +
                              std::string(spec.positional == 2 ? "signal and one value" : "signal") +
                              "; other arguments are named: " + join(valid, "=, ") + "=");
    return std::nullopt;
  }
  Unit signal_unit;
  if (c->function == "energy" || c->function == "power") {
    const ast::Name* n = as_name(positional[0]->value);
    const int part = n ? find_part_named(n->text) : -1;
    if (part < 0) {
      std::vector<std::string> parts;
      for (const Part& p : circuit_.parts) parts.push_back(p.name);
      std::string near = n ? suggest(n->text, parts) : "";
      error(*positional[0], c->function + "() needs an element's name" +
                                (n ? ", and there is no element '" + n->text + "'" : ""),
            near.empty() ? "" : "did you mean '" + near + "'?");
      return std::nullopt;
    }
    f.part = part;
  } else {
    auto s = make_signal(positional[0]->value, "");
    if (!s) return std::nullopt;
    signal_unit = s->unit;
    f.signal = std::move(*s);
  }
  using U = FigureSpec::Unit;
  switch (spec.unit) {
    case U::Signal: f.unit = signal_unit; break;
    case U::SignalTimesSecond: if (signal_unit) f.unit = *signal_unit * Dimension::second(); break;
    case U::SignalPerSecond: if (signal_unit) f.unit = *signal_unit / Dimension::second(); break;
    case U::Second: f.unit = Dimension::second(); break;
    case U::Hertz: f.unit = Dimension::hertz(); break;
    case U::None: f.unit = Dimension::none(); break;
    case U::Joule: f.unit = Dimension::joule(); break;
    case U::Watt: f.unit = Dimension::watt(); break;
  }
  // Named arguments, with the documented defaults filled in.
  if (f.function == "rise") { f.args["lo"] = 0.1; f.args["hi"] = 0.9; }
  if (f.function == "settle") f.args["band"] = 0.02;
  if (f.function == "when") f.args["nth"] = 1;
  for (const auto& [key, a] : named) {
    if (key == "edge") {
      const ast::Name* n = as_name(a->value);
      if (!n || (n->text != "up" && n->text != "down" && n->text != "any")) {
        error(*a, "edge must be up, down or any");
        return std::nullopt;
      }
      f.edge = n->text;
      continue;
    }
    Expected e;
    if (key == "from" || key == "to" || key == "t") e = expect_dim(Dimension::second(), "a time");
    else if (key == "level") e = signal_unit ? expect_dim(*signal_unit, "the signal") : Expected{};
    else e = expect_dim(Dimension::none(), "a fraction");
    std::optional<double> value;
    if (key == "nth") {
      auto n = eval_count(a->value, &global_, c->function + "() nth", 1);
      if (!n) return std::nullopt;
      value = static_cast<double>(*n);
    } else {
      auto q = eval_checked(a->value, &global_, e, c->function + "() " + key);
      if (!q) return std::nullopt;
      value = q->value;
    }
    f.args[key] = *value;
  }
  if (f.function == "when" && !f.args.count("level")) {
    error(*c, "when() needs a level: when(S, level, nth=1, edge=any)");
    return std::nullopt;
  }
  if (f.function == "at" && !f.args.count("t")) {
    error(*c, "at() needs an instant: at(S, t)");
    return std::nullopt;
  }
  if (f.args.count("from") && f.args.count("to") && !(f.args["from"] < f.args["to"])) {
    error(*c, c->function + "(): from must be before to");
    return std::nullopt;
  }
  if (f.function == "rise" && !(f.args["lo"] < f.args["hi"])) {
    error(*c, "rise(): lo must be below hi");
    return std::nullopt;
  }
  return f;
}

void Loader::resolve_records(const Stmt& stmt, const ast::RecordLine& line) {
  (void)stmt;
  for (const ast::RecordEntry& entry : line.entries) {
    auto s = make_signal(entry.expr, entry.name ? entry.name->text : "");
    if (!s) continue;
    if (entry.name) s->where = where(entry);
    bool duplicate = false;
    for (const Signal& r : circuit_.records) {
      if (r.name == s->name) {
        error(entry, "signal '" + s->name + "' is recorded twice");
        duplicate = true;
      }
    }
    if (!duplicate) circuit_.records.push_back(std::move(*s));
  }
}

void Loader::resolve_report(const Stmt& stmt, const ast::ReportLine& line) {
  for (const Report& r : circuit_.reports) {
    if (r.name == line.name.text) {
      error(line.name, "a second report named '" + r.name + "'",
            "first at line " + std::to_string(r.where.line));
      return;
    }
  }
  auto f = make_figure(line.figure);
  if (!f) return;
  Report r;
  r.name = line.name.text;
  r.figure = std::move(*f);
  r.where = where(stmt);
  circuit_.reports.push_back(std::move(r));
}

void Loader::resolve_expect(const Stmt& stmt, const ast::ExpectLine& line) {
  auto f = make_figure(line.figure);
  if (!f) return;
  Expect e;
  e.where = where(stmt);
  e.text = text_of(ast::Tagged{tagged(line.figure).first, stmt.last});
  const std::string& op = line.op;
  e.op = op == "<" ? CompareOp::Less : op == "<=" ? CompareOp::LessEqual
       : op == ">" ? CompareOp::Greater : op == ">=" ? CompareOp::GreaterEqual : CompareOp::Equal;
  auto v = eval(line.value, &global_);
  if (!v) return;
  if (f->unit && v->unit && *f->unit != *v->unit) {
    error(tagged(line.value), "expect: " + f->text + " is in " + unit_text(f->unit) + ", but " +
                                  text_of(line.value) + " is in " + unit_text(v->unit));
    return;
  }
  e.value = v->value;
  e.unit = f->unit ? f->unit : v->unit;
  if (e.op == CompareOp::Equal && !line.within) {
    error(line.keyword, "expect with '=' needs a tolerance",
          "expect " + f->text + " = " + text_of(line.value) + " within 5%");
    return;
  }
  if (e.op != CompareOp::Equal && line.within) {
    error(*line.within, "'within' goes with '=' only");
    return;
  }
  if (line.within) {
    auto tol = eval(*line.within, &global_);
    if (!tol) return;
    const std::string tol_text = text_of(*line.within);
    e.within_relative = !tol_text.empty() && tol_text.back() == '%';
    if (!e.within_relative && tol->unit && e.unit && *tol->unit != *e.unit) {
      error(*line.within, "expect: the tolerance is in " + unit_text(tol->unit) + ", but the value is in " +
                              unit_text(e.unit),
            "give it in the value's unit, or in % of the value");
      return;
    }
    if (!(tol->value >= 0)) {
      error(*line.within, "expect: the tolerance must not be negative");
      return;
    }
    e.within = tol->value;
  }
  e.figure = std::move(*f);
  circuit_.expects.push_back(std::move(e));
}

void Loader::resolve_through() {
  for (const PendingThrough& t : pending_through_) {
    int part = find_part_named(t.prefix + t.name);
    if (part < 0) part = find_part_named(t.name);
    const std::string owner = circuit_.elements[t.element].name;
    if (part < 0) {
      std::vector<std::string> names;
      for (const Part& p : circuit_.parts) {
        if (p.kind == ElementKind::VoltageSource || p.kind == ElementKind::Inductor ||
            p.kind == ElementKind::Vcvs || p.kind == ElementKind::Ccvs)
          names.push_back(p.name);
      }
      std::string near = suggest(t.prefix + t.name, names);
      if (near.empty()) near = suggest(t.name, names);
      error(*t.token, owner + ": through=" + t.name + " names no element",
            near.empty() ? "" : "did you mean '" + near + "'?");
      continue;
    }
    const Part& p = circuit_.parts[part];
    if (p.kind != ElementKind::VoltageSource && p.kind != ElementKind::Inductor &&
        p.kind != ElementKind::Vcvs && p.kind != ElementKind::Ccvs) {
      error(*t.token, owner + ": through= must name a voltage source, an inductor or a vcvs/ccvs; " +
                          p.name + " is a " + kind_name(p.kind));
      continue;
    }
    circuit_.elements[t.element].through = p.main;
  }
}

void Loader::resolve_couples() {
  for (PendingCouple& pc : pending_couples_) {
    bool ok = true;
    std::set<int> seen;
    for (const ast::Name* n : pc.names) {
      int part = find_part_named(pc.prefix + n->text);
      if (part < 0) part = find_part_named(n->text);
      if (part < 0 || circuit_.parts[part].kind != ElementKind::Inductor) {
        std::vector<std::string> inductors;
        for (const Part& p : circuit_.parts) {
          if (p.kind == ElementKind::Inductor) inductors.push_back(p.name);
        }
        std::string near = suggest(n->text, inductors);
        error(*n, "couple " + pc.coupling.name + ": " +
                      (part < 0 ? "no inductor named '" + n->text + "'"
                                : "'" + n->text + "' is a " + kind_name(circuit_.parts[part].kind) +
                                      ", not an inductor"),
              near.empty() ? "" : "did you mean '" + near + "'?");
        ok = false;
        continue;
      }
      if (!seen.insert(part).second) {
        error(*n, "couple " + pc.coupling.name + ": '" + n->text + "' is listed twice");
        ok = false;
        continue;
      }
      pc.coupling.inductors.push_back(circuit_.parts[part].main);
    }
    if (ok) circuit_.couplings.push_back(std::move(pc.coupling));
  }
}

void Loader::resolve_frequency_input() {
  if (!circuit_.frequency || !frequency_input_) return;
  const int part = find_part_named(frequency_input_->text);
  if (part < 0 || (circuit_.parts[part].kind != ElementKind::VoltageSource &&
                   circuit_.parts[part].kind != ElementKind::CurrentSource)) {
    std::vector<std::string> sources;
    for (const Part& p : circuit_.parts) {
      if (p.kind == ElementKind::VoltageSource || p.kind == ElementKind::CurrentSource)
        sources.push_back(p.name);
    }
    std::string near = suggest(frequency_input_->text, sources);
    error(*frequency_input_, "frequency: input=" + frequency_input_->text +
                                 (part < 0 ? " names no element" : " is not a voltage or current source"),
          near.empty() ? (sources.empty() ? "" : "sources: " + join(sources, ", "))
                       : "did you mean '" + near + "'?");
    circuit_.frequency.reset();
    return;
  }
  circuit_.frequency->input_part = part;
}

void Loader::node_warnings() {
  // A node that only one element touches carries no current: usually a typo
  // in a node name. Hidden internal nodes always have two.
  std::vector<int> owner(circuit_.nodes.size(), -1);
  for (std::size_t e = 0; e < circuit_.elements.size(); ++e) {
    for (int n : {circuit_.elements[e].a, circuit_.elements[e].b}) {
      if (owner[n] < 0) owner[n] = static_cast<int>(e);
    }
  }
  for (std::size_t k = 1; k < circuit_.nodes.size(); ++k) {
    const Node& n = circuit_.nodes[k];
    if (n.hidden || node_touches_[k] != 1 || !node_tokens_[k]) continue;
    std::string who = owner[k] >= 0 ? circuit_.elements[owner[k]].name : "";
    warning(*node_tokens_[k], "node '" + n.name + "' is connected to only one element" +
                                  (who.empty() ? "" : " (" + who + ")"),
            "a misspelt node name? Nodes are joined by using the same name");
  }
}

// --- Command-line options -------------------------------------------------------------

void Loader::apply_overrides() {
  for (const auto& [name, value] : options_.overrides) {
    SourceFile& f = add_file("--set", name + "=" + value, true);
    const char* first = f.code.data() + name.size() + 1;
    const char* last = f.code.data() + f.code.size();
    ParamDef* p = global_.find(name);
    if (!p) {
      std::vector<std::string> names;
      for (const auto& [k, v] : global_.params) names.push_back(k);
      std::string near = suggest(name, names);
      error_at(f.code.data(), f.code.data() + name.size(),
               "--set " + name + ": there is no parameter '" + name + "' in the file",
               near.empty() ? (names.empty() ? "the file defines no parameters"
                                             : "parameters: " + join(names, ", "))
                            : "did you mean '" + near + "'?");
      continue;
    }
    // Keep the parsed value alive with the loader: the tree points into f.
    own_stmts_.emplace_back();
    Stmt& holder = own_stmts_.back();
    holder.file = &f;
    holder.first = first;
    holder.last = last;
    ast::ParameterLine line;
    grammar::SyntaxError e;
    ast::Operand op;
    if (value.find_first_not_of(" \t") == std::string::npos) {
      error_at(first - 1, first, "--set " + name + ": the value is empty");
      continue;
    }
    if (!grammar::parse_expression(first, last, op, e)) {
      const char* at = e.where ? e.where : first;
      error_at(at, at + 1,
               "--set " + name + ": " +
                   (e.expected.empty() ? "unexpected text in the value" : "expected " + e.expected),
               "VALUE is an expression, e.g. --set " + name + "=4.7k");
      continue;
    }
    line.name.text = name;
    line.name.first = f.code.data();
    line.name.last = f.code.data() + name.size();
    if (is_sweep_list(op)) {
      // --set NAME=LIST: a sweep of NAME from the command line (elaborated with the
      // file's sweeps, replacing a sweep of the same parameter in its place).
      ast::SweepLine sweep;
      sweep.name = line.name;
      sweep.list = std::move(op);
      holder.first = f.code.data();
      holder.ast = std::move(sweep);
      const auto& stored = boost::get<ast::SweepLine>(holder.ast.get());
      if (p->sweep) p->sweep = &stored;  // a parameter only a sweep defines: its first value
      command_line_sweeps_.push_back(&holder);
      continue;
    }
    line.value = std::move(op);
    holder.ast = std::move(line);
    const auto& stored = boost::get<ast::ParameterLine>(holder.ast.get());
    p->expr = &stored.value;
    p->name_token = &stored.name;
    p->eval_scope = &global_;
    p->sweep = nullptr;
    p->overridden = true;
  }
}

void Loader::elaborate_command_line_sweeps() {
  for (const Stmt* stmt : command_line_sweeps_) {
    const auto& line = boost::get<ast::SweepLine>(stmt->ast.get());
    auto& sweeps = circuit_.sweeps;
    const auto same = std::find_if(sweeps.begin(), sweeps.end(),
                                   [&](const SweepRequest& r) { return r.parameter == line.name.text; });
    std::optional<std::size_t> place;
    if (same != sweeps.end()) {
      place = static_cast<std::size_t>(same - sweeps.begin());
      sweeps.erase(same);
    }
    const std::size_t before = sweeps.size();
    elaborate_sweep(*stmt, line);
    if (place && sweeps.size() > before) std::rotate(sweeps.begin() + static_cast<std::ptrdiff_t>(*place), sweeps.end() - 1, sweeps.end());
  }
}

void Loader::apply_record_option() {
  if (options_.records.empty()) return;
  circuit_.records.clear();
  for (const std::string& text : options_.records) {
    SourceFile& f = add_file("--record", text, true);
    own_stmts_.emplace_back();
    Stmt& holder = own_stmts_.back();
    holder.file = &f;
    ast::RecordLine line;
    line.entries.emplace_back();
    grammar::SyntaxError e;
    const char* first = f.code.data();
    const char* last = first + f.code.size();
    if (!grammar::parse_record_entry(first, last, line.entries.back(), e)) {
      const char* at = e.where ? e.where : first;
      error_at(at, at + 1, "--record " + text + ": " +
                               (e.expected.empty() ? "unexpected text" : "expected " + e.expected));
      continue;
    }
    holder.ast = std::move(line);
    resolve_records(holder, boost::get<ast::RecordLine>(holder.ast.get()));
  }
}

// --- Driver ------------------------------------------------------------------------------

bool Loader::syntax_only(std::string text, const std::string& file_name, Diagnostics& out) {
  SourceFile& f = add_file(file_name, std::move(text));
  std::vector<SplitProblem> problems;
  auto raws = split_statements(f, problems);
  for (const SplitProblem& p : problems) error_at(p.where, p.where + 1, p.message, p.hint);
  for (const RawStatement& raw : raws) {
    ast::Statement st;
    grammar::SyntaxError e;
    if (!grammar::parse_statement(raw.first, raw.last, st, e)) syntax_error(f, raw, e);
  }
  std::stable_sort(diagnostics_.begin(), diagnostics_.end(),
                   [](const Keyed& a, const Keyed& b) { return a.key < b.key; });
  for (Keyed& k : diagnostics_) out.push_back(std::move(k.diagnostic));
  return errors_ == 0;
}

void Loader::read(std::string text, const std::string& file_name) {
  pass1_->file_name = file_name;
  SourceFile& top = add_file(file_name, std::move(text));
  std::vector<std::string> include_stack;
  std::error_code ec;
  fs::path canonical = fs::weakly_canonical(fs::path(file_name), ec);
  include_stack.push_back(ec ? file_name : canonical.string());
  read_file(top, include_stack);
  pass1_->diagnostics = std::move(diagnostics_);
  pass1_->seen = std::move(seen_);
  pass1_->errors = errors_;
  diagnostics_.clear();
  seen_.clear();
  errors_ = 0;
}

LoadResult Loader::elaborate() {
  if (parsed_->unreadable) {
    LoadResult r;
    r.diagnostics = parsed_->failure;
    return r;
  }
  // Pass 1's diagnostics first: with the stable sort below, the order is a single load's.
  diagnostics_ = parsed_->diagnostics;
  errors_ = parsed_->errors;
  const std::vector<const Stmt*>& top = parsed_->top;
  global_.prefix = "";
  circuit_.file = parsed_->file_name;
  {
    Node g;
    g.name = "gnd";
    circuit_.nodes.push_back(g);
    node_touches_.push_back(0);
    node_tokens_.push_back(nullptr);
    node_index_.emplace("gnd", kGround);
  }

  // Parameters first (any order), then sweeps may define missing ones, then
  // --set overrides replace definitions.
  for (const Stmt* s : top) {
    if (auto* line = boost::get<ast::ParameterLine>(&s->ast.get())) register_parameter(*s, *line, global_, "");
  }
  for (const Stmt* s : top) {
    if (auto* line = boost::get<ast::SweepLine>(&s->ast.get())) {
      if (!global_.find(line->name.text) && valid_parameter_name(line->name)) {
        param_store_.emplace_back();
        ParamDef& p = param_store_.back();
        p.name = p.full_name = line->name.text;
        p.name_token = &line->name;
        p.eval_scope = &global_;
        p.sweep = line;
        global_.params[p.name] = &p;
        global_order_.push_back(&p);
      }
    }
  }
  apply_overrides();
  for (ParamDef* p : global_order_) eval_param(*p);

  Context ctx;
  ctx.scope = &global_;
  for (const Stmt* s : top) elaborate_statement(*s, ctx, true);
  elaborate_command_line_sweeps();
  // Block bodies are checked even when no `use` instantiates them? Only
  // syntax: their names depend on the instance.

  resolve_through();
  resolve_couples();
  resolve_frequency_input();
  for (const Stmt* s : top) {
    const auto& v = s->ast.get();
    if (auto* r = boost::get<ast::RecordLine>(&v)) resolve_records(*s, *r);
    else if (auto* r = boost::get<ast::ReportLine>(&v)) resolve_report(*s, *r);
    else if (auto* e = boost::get<ast::ExpectLine>(&v)) resolve_expect(*s, *e);
  }
  apply_record_option();
  if (errors_ == 0) node_warnings();

  // Global parameters, in definition order, before the instance ones.
  std::vector<Parameter> globals;
  for (ParamDef* p : global_order_) {
    if (p->state != ParamDef::State::Done) continue;
    Parameter out;
    out.name = p->name;
    out.value = p->q.value;
    out.unit = p->q.unit;
    out.text = p->expr ? text_of(*p->expr) : (p->sweep ? text_of(p->sweep->list) : "");
    out.where = p->name_token ? where(*p->name_token) : SourcePosition{};
    globals.push_back(std::move(out));
  }
  circuit_.parameters.insert(circuit_.parameters.begin(), globals.begin(), globals.end());

  std::stable_sort(diagnostics_.begin(), diagnostics_.end(),
                   [](const Keyed& a, const Keyed& b) { return a.key < b.key; });
  LoadResult result;
  for (Keyed& k : diagnostics_) result.diagnostics.push_back(std::move(k.diagnostic));
  if (errors_ == 0) {
    for (const Diagnostic& d : result.diagnostics) {
      if (d.severity != Severity::Error) circuit_.warnings.push_back(d);
    }
    result.circuit = std::move(circuit_);
  }
  return result;
}

}  // namespace

std::shared_ptr<const ParsedSource> parse_file(const std::string& path) {
  // A file that cannot be read: the diagnostic is the whole result of every elaboration.
  const auto unreadable = [&path](std::string message, std::string hint) {
    auto data = std::make_unique<ParsedSource::Data>();
    data->file_name = path;
    data->unreadable = true;
    Diagnostic d;
    d.where.file = path;
    d.message = std::move(message);
    d.hint = std::move(hint);
    data->failure.push_back(std::move(d));
    return std::make_shared<const ParsedSource>(std::move(data));
  };
  std::error_code ec;
  if (fs::is_directory(path, ec))
    return unreadable("'" + path + "' is a directory, not a circuit file",
                      "name a file, e.g. " + (fs::path(path) / "circuit.rlc").string());
  std::ifstream in(path, std::ios::binary);
  if (!in) return unreadable("cannot read file '" + path + "'", "check the path; circuit files end in .rlc");
  std::ostringstream ss;
  ss << in.rdbuf();
  return parse_text(ss.str(), path);
}

std::shared_ptr<const ParsedSource> parse_text(std::string_view text, const std::string& file_name) {
  auto data = std::make_unique<ParsedSource::Data>();
  const LoadOptions none;
  Loader reader(none, *data);
  reader.read(std::string(text), file_name);
  return std::make_shared<const ParsedSource>(std::move(data));
}

LoadResult elaborate(const ParsedSource& source, const LoadOptions& options) {
  Loader loader(options, source.data());
  return loader.elaborate();
}

LoadResult load_file(const std::string& path, const LoadOptions& options) {
  return elaborate(*parse_file(path), options);
}

LoadResult load_text(std::string_view text, const std::string& file_name,
                     const LoadOptions& options) {
  return elaborate(*parse_text(text, file_name), options);
}

namespace detail {
bool check_syntax(std::string_view text, const std::string& file_name, Diagnostics& diagnostics) {
  LoadOptions options;
  ParsedSource::Data data;
  Loader loader(options, data);
  return loader.syntax_only(std::string(text), file_name, diagnostics);
}
}  // namespace detail

}  // namespace ringdown
