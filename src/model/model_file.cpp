#include "model_file.hpp"

#include "expression.hpp"
#include "io/error.hpp"

#include <fmt/format.h>
#include <yaml-cpp/yaml.h>

#include <cmath>
#include <fstream>
#include <limits>
#include <set>
#include <sstream>

namespace longrun::model {

namespace {

class Reader {
  public:
    Reader(std::string file, const Overrides& overrides) : file_(std::move(file)) {
        for (const auto& o : overrides)
            overrides_.push_back({o.first, o.second, false});
    }

    Model read(const YAML::Node& root) {
        Model m;
        m.file = file_;
        if (!root.IsDefined() || root.IsNull())
            fail(root, "the model is empty; it needs at least 'kind', 'variables', 'start' and "
                       "'events'");
        if (!root.IsMap())
            fail(root, "a model is a mapping of keys (kind, parameters, variables, start, events, "
                       "...) at the top level");
        check_keys(root, "the top level",
                   {"kind", "parameters", "variables", "start", "events", "measures", "absorbing",
                    "leftover_probability"});
        read_kind(m, root);
        read_parameters(m, root["parameters"]);
        read_variables(m, require(root, "variables", "the top level"));
        read_start(m, require(root, "start", "the top level"));
        read_events(m, require(root, "events", "the top level"));
        read_measures(m, root["measures"]);
        if (const auto a = root["absorbing"]) {
            if (m.kind != io::ChainKind::ctmc)
                fail(a, "'absorbing' is for a ctmc (in a dtmc a state with nowhere to go keeps "
                        "its probability through 'leftover_probability: stay')");
            m.absorbing = text(a, "'absorbing'");
        }
        if (const auto l = root["leftover_probability"]) {
            const std::string v = scalar(l, "'leftover_probability'");
            if (m.kind != io::ChainKind::dtmc)
                fail(l, "'leftover_probability' is for a dtmc (a ctmc's events give rates, not "
                        "probabilities)");
            if (v == "stay")
                m.leftover = Leftover::stay;
            else if (v == "error")
                m.leftover = Leftover::refuse;
            else
                fail(l, fmt::format("'leftover_probability' is 'stay' or 'error', not '{}'", v));
            m.leftover_where = where(l);
        }
        for (const auto& o : overrides_)
            if (!o.used)
                throw UsageError(fmt::format("--set {}={}: {} has no parameter '{}'{}", o.name,
                                             o.value, file_, o.name, parameter_list(m)));
        return m;
    }

  private:
    struct Override {
        std::string name, value;
        bool used;
    };
    std::string file_;
    std::vector<Override> overrides_;

    Where where(const YAML::Node& n) const {
        return {file_, n.Mark().is_null() ? 0 : n.Mark().line + 1};
    }

    [[noreturn]] void fail(const YAML::Node& n, const std::string& message) const {
        throw InputError(where(n).prefix() + message);
    }

    YAML::Node require(const YAML::Node& map, const char* key, const std::string& in) const {
        auto n = map[key];
        if (!n)
            fail(map, fmt::format("{} has no '{}'", in, key));
        return n;
    }

    void check_keys(const YAML::Node& map, const std::string& in,
                    std::initializer_list<const char*> allowed) const {
        std::set<std::string> seen;
        for (const auto& kv : map) {
            const std::string key = kv.first.Scalar();
            if (!seen.insert(key).second)
                fail(kv.first, fmt::format("'{}' appears twice in {}", key, in));
            bool known = false;
            std::string list;
            for (const char* a : allowed) {
                known = known || key == a;
                list += (list.empty() ? "" : ", ") + std::string(a);
            }
            if (!known)
                fail(kv.first,
                     fmt::format("unknown key '{}' in {} (known keys: {})", key, in, list));
        }
    }

    std::string scalar(const YAML::Node& n, const std::string& what) const {
        if (!n.IsScalar())
            fail(n, fmt::format("{} must be a single value (a number, a name or a quoted "
                                "expression)",
                                what));
        return n.Scalar();
    }

    Text text(const YAML::Node& n, const std::string& what) const {
        return {scalar(n, what), where(n)};
    }

    std::string name(const YAML::Node& key, const std::string& what) const {
        const std::string s = scalar(key, what);
        if (!is_identifier(s))
            fail(key, fmt::format("{} '{}' is not a name (letters, digits and '_', not starting "
                                  "with a digit)",
                                  what, s));
        if (is_reserved_name(s))
            fail(key,
                 fmt::format("{} '{}' is the name of a built-in function or constant", what, s));
        return s;
    }

    void read_kind(Model& m, const YAML::Node& root) const {
        const auto k = require(root, "kind", "the top level");
        const auto kind = io::parse_kind(scalar(k, "'kind'"));
        if (!kind)
            fail(k, fmt::format("'kind' is ctmc (events have rates) or dtmc (events have "
                                "probabilities), not '{}'",
                                k.Scalar()));
        m.kind = *kind;
    }

    Scope parameter_scope(const Model& m) const {
        Scope s;
        for (const auto& p : m.parameters)
            s.constants.emplace_back(p.name, p.value);
        return s;
    }

    std::string parameter_list(const Model& m) const {
        if (m.parameters.empty())
            return " (it has no parameters)";
        std::string list;
        for (const auto& p : m.parameters)
            list += (list.empty() ? "" : ", ") + p.name;
        return " (its parameters: " + list + ")";
    }

    void read_parameters(Model& m, const YAML::Node& n) {
        if (!n || n.IsNull())
            return;
        if (!n.IsMap())
            fail(n, "'parameters' is a mapping of names to numbers, e.g. {arrival: 4.0}");
        for (const auto& kv : n) {
            const std::string nm = name(kv.first, "parameter");
            for (const auto& p : m.parameters)
                if (p.name == nm)
                    fail(kv.first, fmt::format("parameter '{}' is defined twice", nm));
            Text t = text(kv.second, fmt::format("parameter '{}'", nm));
            std::string role = fmt::format("parameter '{}'", nm);
            for (auto& o : overrides_)
                if (o.name == nm) {
                    t.expression = o.value;
                    o.used = true;
                    role = fmt::format("--set {}={}", o.name, o.value);
                }
            const double v = evaluate_constant(t, parameter_scope(m), role);
            m.parameters.push_back({nm, v, where(kv.first)});
        }
    }

    std::int64_t integer(const YAML::Node& n, const Scope& scope, const std::string& what) const {
        const double v = evaluate_constant(text(n, what), scope, what);
        if (v != std::floor(v) || std::fabs(v) > 9007199254740992.0)
            fail(n, fmt::format("{} is {}, not an integer", what, v));
        return static_cast<std::int64_t>(v);
    }

    void read_variables(Model& m, const YAML::Node& n) const {
        if (!n.IsMap() || n.size() == 0)
            fail(n, "'variables' is a mapping of names to bounds, e.g. {queue: {from: 0, to: 10}}");
        const Scope scope = parameter_scope(m);
        for (const auto& kv : n) {
            const std::string nm = name(kv.first, "variable");
            if (nm == several_events_label)
                fail(kv.first, "'several' is reserved");
            for (const auto& p : m.parameters)
                if (p.name == nm)
                    fail(kv.first, fmt::format("'{}' is both a parameter and a variable", nm));
            for (const auto& v : m.variables)
                if (v.name == nm)
                    fail(kv.first, fmt::format("variable '{}' is declared twice", nm));
            const auto& b = kv.second;
            if (!b.IsMap())
                fail(b, fmt::format("variable '{}' needs bounds, e.g. {{from: 0, to: 10}}", nm));
            check_keys(b, fmt::format("variable '{}'", nm), {"from", "to"});
            Variable v{nm,
                       integer(require(b, "from", "variable '" + nm + "'"), scope,
                               fmt::format("lower bound ('from') of variable '{}'", nm)),
                       integer(require(b, "to", "variable '" + nm + "'"), scope,
                               fmt::format("upper bound ('to') of variable '{}'", nm)),
                       where(kv.first)};
            if (v.lower > v.upper)
                fail(b, fmt::format("variable '{}' has from = {} above to = {}", nm, v.lower,
                                    v.upper));
            m.variables.push_back(v);
        }
    }

    std::size_t variable_index(const Model& m, const YAML::Node& key, const std::string& in) const {
        const std::string nm = scalar(key, "a variable name");
        for (std::size_t i = 0; i < m.variables.size(); ++i)
            if (m.variables[i].name == nm)
                return i;
        fail(key, fmt::format("{}: '{}' is not a variable of the model", in, nm));
    }

    void read_start(Model& m, const YAML::Node& n) const {
        if (!n.IsMap())
            fail(n, "'start' gives every variable a value, e.g. {queue: 0}");
        const Scope scope = parameter_scope(m);
        std::vector<bool> given(m.variables.size(), false);
        m.start.assign(m.variables.size(), 0);
        for (const auto& kv : n) {
            const auto i = variable_index(m, kv.first, "'start'");
            if (given[i])
                fail(kv.first, fmt::format("'start' gives '{}' twice", m.variables[i].name));
            given[i] = true;
            const auto& var = m.variables[i];
            const auto v = integer(kv.second, scope, fmt::format("start value of '{}'", var.name));
            if (v < var.lower || v > var.upper)
                fail(kv.second, fmt::format("start value of '{}' is {}, outside its bounds {}..{}",
                                            var.name, v, var.lower, var.upper));
            m.start[i] = v;
        }
        for (std::size_t i = 0; i < given.size(); ++i)
            if (!given[i])
                fail(n,
                     fmt::format("'start' gives no value for variable '{}'", m.variables[i].name));
    }

    void read_events(Model& m, const YAML::Node& n) const {
        if (!n.IsSequence() || n.size() == 0)
            fail(n, "'events' is a list of events, each with a name, a rate and what it changes");
        if (n.size() >= std::numeric_limits<std::uint16_t>::max())
            fail(n, "too many events (at most 65534: event labels are stored as 16-bit numbers)");
        for (const auto& e : n) {
            if (!e.IsMap())
                fail(e, "an event is a mapping with keys name, when, rate, then");
            check_keys(e, "an event", {"name", "when", "rate", "then"});
            Event ev;
            ev.where = where(e);
            const auto nn = require(e, "name", "this event");
            ev.name = name(nn, "event name");
            if (ev.name == several_events_label || ev.name == "stay")
                fail(nn, fmt::format("the event name '{}' is reserved (it labels merged "
                                     "transitions)",
                                     ev.name));
            for (const auto& other : m.events)
                if (other.name == ev.name)
                    fail(nn, fmt::format("two events are named '{}'", ev.name));
            const std::string who = fmt::format("event '{}'", ev.name);
            if (const auto w = e["when"])
                ev.guard = text(w, who + ": 'when'");
            ev.rate =
                text(require(e, "rate", who),
                     who + (m.kind == io::ChainKind::ctmc ? ": 'rate'" : ": 'rate' (probability)"));
            if (const auto t = e["then"]; t && !t.IsNull()) {
                if (!t.IsMap())
                    fail(t, who + ": 'then' maps variables to their new values, e.g. "
                                  "{queue: \"queue + 1\"}");
                for (const auto& kv : t) {
                    const auto i = variable_index(m, kv.first, who + ": 'then'");
                    for (const auto& u : ev.updates)
                        if (u.variable == i)
                            fail(kv.first, fmt::format("{}: 'then' sets '{}' twice", who,
                                                       m.variables[i].name));
                    ev.updates.push_back({i, text(kv.second, who + ": 'then'")});
                }
            }
            m.events.push_back(std::move(ev));
        }
    }

    void read_measures(Model& m, const YAML::Node& n) const {
        if (!n || n.IsNull())
            return;
        if (!n.IsMap())
            fail(n, "'measures' maps names to expressions, e.g. {full: \"queue == 10\"}");
        for (const auto& kv : n) {
            const std::string nm = name(kv.first, "measure");
            for (const auto& other : m.measures)
                if (other.name == nm)
                    fail(kv.first, fmt::format("measure '{}' is defined twice", nm));
            m.measures.push_back({nm, text(kv.second, fmt::format("measure '{}'", nm))});
        }
    }
};

} // namespace

Model parse_model(const std::string& yaml_text, const std::string& file_name,
                  const Overrides& overrides) {
    YAML::Node root;
    try {
        root = YAML::Load(yaml_text);
    } catch (const YAML::Exception& e) {
        const Where w{file_name, e.mark.is_null() ? 0 : e.mark.line + 1};
        throw InputError(w.prefix() + "not valid YAML: " + e.msg);
    }
    try {
        Model m = Reader(file_name, overrides).read(root);
        m.text = yaml_text;
        return m;
    } catch (const YAML::Exception& e) {
        const Where w{file_name, e.mark.is_null() ? 0 : e.mark.line + 1};
        throw InputError(w.prefix() + e.msg);
    }
}

Model read_model_file(const std::string& path, const Overrides& overrides) {
    std::ifstream in(path, std::ios::binary);
    if (!in)
        throw InputError(path + ": cannot open the model file");
    std::ostringstream s;
    s << in.rdbuf();
    if (in.bad())
        throw InputError(path + ": cannot read the model file");
    return parse_model(s.str(), path, overrides);
}

} // namespace longrun::model
