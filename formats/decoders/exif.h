/* EXIF orientation from a TIFF-structured EXIF block (the payload of a JPEG APP1 "Exif" segment
 * after its 6-byte identifier, or of a PNG eXIf chunk). */
#ifndef KILN_EXIF_H
#define KILN_EXIF_H

#include <stddef.h>
#include <stdint.h>

/* Returns the Orientation tag (0x0112) of IFD0, 1-8, or 1 when absent or malformed. Reads only
 * inside [data, data + len). */
uint32_t kiln_exif_orientation(const uint8_t *data, size_t len);

#endif
