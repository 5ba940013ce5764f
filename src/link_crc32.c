/* CRC-32 of IEEE 802.3 (the one zlib, PNG and Ethernet use): reflected,
 * polynomial 0x04C11DB7 (0xEDB88320 reflected), initial value and final XOR
 * 0xFFFFFFFF; check value 0xCBF43926 for "123456789" (R. N. Williams, "A
 * Painless Guide to CRC Error Detection Algorithms", 1993, the CRC-32 model).
 * Four bits at a time from a 16-entry table: 64 bytes of constants, suited
 * to a cart's controller.
 * SPDX-License-Identifier: MIT */
#include "link_internal.h"

/* Entry n: the CRC register after shifting the nibble n through four steps. */
static const uint32_t nibble[16] = {
    0x00000000u, 0x1DB71064u, 0x3B6E20C8u, 0x26D930ACu, 0x76DC4190u, 0x6B6B51F4u, 0x4DB26158u, 0x5005713Cu,
    0xEDB88320u, 0xF00F9344u, 0xD6D6A3E8u, 0xCB61B38Cu, 0x9B64C2B0u, 0x86D3D2D4u, 0xA00AE278u, 0xBDBDF21Cu,
};

uint32_t veer_link_crc32(uint32_t crc, const void *data, size_t size) {
    const uint8_t *p = data;
    if (!p) return crc;
    crc = ~crc;
    for (size_t i = 0; i < size; i++) {
        crc ^= p[i];
        crc = (crc >> 4) ^ nibble[crc & 15u];
        crc = (crc >> 4) ^ nibble[crc & 15u];
    }
    return ~crc;
}
