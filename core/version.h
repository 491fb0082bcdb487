/* The kiln version, recorded in every manifest. */
#ifndef KILN_VERSION_H
#define KILN_VERSION_H
#define KILN_VERSION "0.1.0"
#endif
