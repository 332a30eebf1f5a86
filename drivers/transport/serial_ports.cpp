// libserialport enumeration with RAII for the port list and one check() per call.
#include "drivers/transport/serial_ports.h"

#include <memory>

#include <fmt/format.h>
#include <libserialport.h>

#include "core/errors.h"

namespace ampbench::drivers {
namespace {

void check(sp_return rc, const char* what) {
    if (rc < 0) {
        char* msg = sp_last_error_message();
        std::string text = msg ? msg : "unknown error";
        sp_free_error_message(msg);
        throw ConnectionError(fmt::format("serial ports: {} failed: {}", what, text));
    }
}

struct PortListDeleter {
    void operator()(sp_port** list) const { sp_free_port_list(list); }
};

std::string text_or_empty(const char* s) { return s ? std::string(s) : std::string(); }

}  // namespace

std::vector<SerialPortInfo> list_serial_ports() {
    sp_port** raw = nullptr;
    check(sp_list_ports(&raw), "listing ports");
    std::unique_ptr<sp_port*, PortListDeleter> list(raw);
    std::vector<SerialPortInfo> ports;
    for (sp_port** p = list.get(); p && *p; ++p) {
        SerialPortInfo info;
        info.device = text_or_empty(sp_get_port_name(*p));
        info.description = text_or_empty(sp_get_port_description(*p));
        const sp_transport t = sp_get_port_transport(*p);
        info.transport = t == SP_TRANSPORT_USB ? "usb" : t == SP_TRANSPORT_BLUETOOTH ? "bluetooth" : "native";
        if (t == SP_TRANSPORT_USB) {
            int vid = 0, pid = 0;
            if (sp_get_port_usb_vid_pid(*p, &vid, &pid) == SP_OK) {
                info.usb_vendor = vid;
                info.usb_product = pid;
            }
            info.usb_serial = text_or_empty(sp_get_port_usb_serial(*p));
            info.manufacturer = text_or_empty(sp_get_port_usb_manufacturer(*p));
            info.product = text_or_empty(sp_get_port_usb_product(*p));
        }
        ports.push_back(std::move(info));
    }
    return ports;
}

std::string find_port_by_usb_serial(const std::string& usb_serial) {
    for (const auto& port : list_serial_ports())
        if (port.usb_serial == usb_serial) return port.device;
    throw ConnectionError(fmt::format("serial://usb-serial={}: no serial port has this USB serial number "
                                      "(see `ampbench ports`)", usb_serial));
}

}  // namespace ampbench::drivers
