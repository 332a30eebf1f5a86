// `ampbench ports [--json]`: the serial ports libserialport can see, with USB vendor:product and
// serial number (a bench URI may name a port as serial://usb-serial=<serial>).
#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "drivers/transport/serial_ports.h"

namespace ampbench::cli {
namespace {

std::string vid_pid(const drivers::SerialPortInfo& p) {
    if (!p.usb_vendor || !p.usb_product) return "";
    return fmt::format("{:04x}:{:04x}", *p.usb_vendor, *p.usb_product);
}

int run_ports(bool json, Context& ctx) {
    const auto ports = drivers::list_serial_ports();
    if (json) {
        nlohmann::ordered_json doc;
        doc["ports"] = nlohmann::ordered_json::array();
        for (const auto& p : ports) {
            const std::string id = vid_pid(p);
            doc["ports"].push_back({{"device", p.device},
                                    {"description", p.description},
                                    {"transport", p.transport},
                                    {"usb_vid_pid", id.empty() ? nlohmann::ordered_json(nullptr) : nlohmann::ordered_json(id)},
                                    {"usb_serial", p.usb_serial.empty() ? nlohmann::ordered_json(nullptr)
                                                                        : nlohmann::ordered_json(p.usb_serial)}});
        }
        ctx.out << doc.dump(2) << "\n";
        return 0;
    }
    if (ports.empty()) {
        ctx.out << "no serial ports found\n";
        return 0;
    }
    ctx.out << fmt::format("{:<20} {:<10} {:<16} {}\n", "device", "usb id", "usb serial", "description");
    for (const auto& p : ports)
        ctx.out << fmt::format("{:<20} {:<10} {:<16} {}\n", p.device, vid_pid(p), p.usb_serial, p.description);
    return 0;
}

}  // namespace

void add_ports_command(CLI::App& app, Context& ctx) {
    auto json = std::make_shared<bool>(false);
    auto* cmd = app.add_subcommand("ports", "List serial ports (device, USB vendor:product, USB serial number)");
    cmd->add_flag("--json", *json, "Machine-readable output");
    cmd->callback([json, &ctx] { ctx.action = [json, &ctx] { return run_ports(*json, ctx); }; });
}

}  // namespace ampbench::cli
