/* Made tests/data/staff.sas7bdat and staff.sas7bcat once (invented values), with ReadStat 1.1.8
   (Debian package libreadstat-dev): gcc staff_sas.c -o staff_sas -lreadstat && ./staff_sas */
#include <readstat.h>
#include <stdio.h>
static ssize_t w(const void *b, size_t n, void *ctx) { return fwrite(b, 1, n, (FILE *)ctx); }
int main(void) {
    /* catalog: one invented label set */
    FILE *fc = fopen("staff.sas7bcat", "wb");
    readstat_writer_t *c = readstat_writer_init();
    readstat_set_data_writer(c, w);
    readstat_label_set_t *yn = readstat_add_label_set(c, READSTAT_TYPE_DOUBLE, "YESNO");
    readstat_label_double_value(yn, 1, "Yes");
    readstat_label_double_value(yn, 2, "No");
    if (readstat_begin_writing_sas7bcat(c, fc) != READSTAT_OK) return 1;
    if (readstat_end_writing(c) != READSTAT_OK) return 2;
    readstat_writer_free(c); fclose(fc);
    /* data file: mentor names the catalog's format YESNO; R is a SAS special missing value */
    FILE *fd = fopen("staff.sas7bdat", "wb");
    readstat_writer_t *d = readstat_writer_init();
    readstat_set_data_writer(d, w);
    readstat_variable_t *id = readstat_add_variable(d, "id", READSTAT_TYPE_DOUBLE, 0);
    readstat_variable_t *mentor = readstat_add_variable(d, "mentor", READSTAT_TYPE_DOUBLE, 0);
    readstat_variable_set_label(mentor, "Has a mentor at school");
    readstat_variable_set_format(mentor, "YESNO");
    readstat_variable_t *tenure = readstat_add_variable(d, "tenure", READSTAT_TYPE_DOUBLE, 0);
    double m[6] = {1, 2, 1, 0, 2, 1}; double t[6] = {1, 2, 2, 1, 1, 2};
    if (readstat_begin_writing_sas7bdat(d, fd, 6) != READSTAT_OK) return 3;
    for (int i = 0; i < 6; i++) {
        readstat_begin_row(d);
        readstat_insert_double_value(d, id, i + 1);
        if (i == 3) readstat_insert_tagged_missing_value(d, mentor, 'R');
        else readstat_insert_double_value(d, mentor, m[i]);
        readstat_insert_double_value(d, tenure, t[i]);
        readstat_end_row(d);
    }
    if (readstat_end_writing(d) != READSTAT_OK) return 4;
    readstat_writer_free(d); fclose(fd);
    return 0;
}
