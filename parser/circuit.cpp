// Look-ups on the elaborated circuit.
#include "parser/circuit.hpp"

namespace ringdown {

const char* kind_name(ElementKind kind) {
  switch (kind) {
    case ElementKind::Resistor: return "resistor";
    case ElementKind::Capacitor: return "capacitor";
    case ElementKind::Inductor: return "inductor";
    case ElementKind::VoltageSource: return "voltage";
    case ElementKind::CurrentSource: return "current";
    case ElementKind::Vcvs: return "vcvs";
    case ElementKind::Vccs: return "vccs";
    case ElementKind::Ccvs: return "ccvs";
    case ElementKind::Cccs: return "cccs";
    case ElementKind::Switch: return "switch";
  }
  return "element";
}

namespace {
template <class Items>
int find_by_name(const Items& items, const std::string& name) {
  for (std::size_t k = 0; k < items.size(); ++k) {
    if (items[k].name == name) return static_cast<int>(k);
  }
  return -1;
}
}  // namespace

int Circuit::find_node(const std::string& name) const { return find_by_name(nodes, name); }
int Circuit::find_part(const std::string& name) const { return find_by_name(parts, name); }
int Circuit::find_element(const std::string& name) const { return find_by_name(elements, name); }

}  // namespace ringdown
