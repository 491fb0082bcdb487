/* Minimal, bounds-checked EXIF reader: only IFD0's Orientation tag is ever needed. */
#include "exif.h"

static uint32_t rd16(const uint8_t *p, int le)
{
    return le ? (uint32_t)p[0] | (uint32_t)p[1] << 8 : (uint32_t)p[0] << 8 | p[1];
}

static uint32_t rd32(const uint8_t *p, int le)
{
    return le ? (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24
              : (uint32_t)p[0] << 24 | (uint32_t)p[1] << 16 | (uint32_t)p[2] << 8 | p[3];
}

uint32_t kiln_exif_orientation(const uint8_t *d, size_t len)
{
    if (len < 8)
        return 1;
    int le;
    if (d[0] == 'I' && d[1] == 'I')
        le = 1;
    else if (d[0] == 'M' && d[1] == 'M')
        le = 0;
    else
        return 1;
    if (rd16(d + 2, le) != 42)
        return 1;
    uint32_t ifd = rd32(d + 4, le);
    if (ifd > len || len - ifd < 2)
        return 1;
    uint32_t n = rd16(d + ifd, le);
    for (uint32_t i = 0; i < n; i++) {
        uint64_t off = (uint64_t)ifd + 2 + 12u * i;
        if (off + 12 > len)
            return 1;
        const uint8_t *e = d + off;
        if (rd16(e, le) != 0x0112)
            continue;
        uint32_t type = rd16(e + 2, le), count = rd32(e + 4, le);
        if (type != 3 || count < 1) /* SHORT */
            return 1;
        uint32_t v = rd16(e + 8, le);
        return v >= 1 && v <= 8 ? v : 1;
    }
    return 1;
}
